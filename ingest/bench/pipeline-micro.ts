// Per-message cost of the pipeline alone (no broker, no database): a quick look at where
// the service's CPU goes. `npx tsx ingest/bench/pipeline-micro.ts`
import { IngestPipeline } from '../src/pipeline/ingest-pipeline';
import { createMetrics } from '../src/metrics';
import { ServiceEvents } from '../src/events';
import { createLogger } from '../src/logger';
import { PlantFilter, plantDesign, singlePayload } from '../../simulators/src/index';

const estimators = Number(process.env.N ?? 2000);
const messages = Number(process.env.MESSAGES ?? 200_000);
const infos = Array.from({ length: estimators }, (_, i) => ({
  id: i + 1, unitId: i + 1, unitKey: `u${i}`, key: 'position', siteId: 1, measurementDim: 2, expectedIntervalMs: 1000, designRevisionId: 1,
}));
const registry = { find: async (u: string) => infos[Number(u.slice(1))], all: () => infos.values(), loadAll: async () => estimators } as never;
let written = 0;
const writer = { write: async (p: { samples?: unknown[] }) => { written += p.samples?.length ?? 0; }, pendingSamples: () => 0 } as never;
const pipeline = new IngestPipeline(
  { registry, writer, clock: { now: () => Date.now() }, logger: createLogger('silent'), metrics: createMetrics(), events: new ServiceEvents(), loadCheckpoint: async () => null, unitIdOf: async () => 1 },
  {},
);
const filters = infos.map((_, i) => new PlantFilter({ design: plantDesign('tractor-position'), seed: i + 1, startTime: Date.now() - 3600_000, reference: false }));
const payloads: Buffer[] = [];
for (let k = 0; k < messages + 20_000; k++) payloads.push(Buffer.from(singlePayload(filters[k % estimators].next())));
(async () => {
  // warm up
  for (let k = 0; k < 20_000; k++) await pipeline.handle(`u${k % estimators}`, "position", "t", payloads[k]);
  const t0 = performance.now();
  for (let k = 0; k < messages; k++) {
    const i = k % estimators;
    await pipeline.handle(`u${i}`, "position", "t", payloads[20_000 + k]);
  }
  const ms = performance.now() - t0;
  console.log(`${messages} messages in ${ms.toFixed(0)} ms: ${((ms * 1000) / messages).toFixed(1)} µs per message (${written} samples passed on)`);
})();
