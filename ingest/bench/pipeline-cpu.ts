/**
 * The service's checks alone, without the broker or the database: CPU per sample of
 * IngestPipeline.handle (parse, schema, per-estimator checks, rules) with a writer that
 * stores nothing, and the size and CPU of one estimator checkpoint of the whole fleet
 * (what IngestPipeline.checkpoint hands the writer every WHITECAP_CHECKPOINT_EVERY_MS).
 *
 *   npx tsx ingest/bench/pipeline-cpu.ts [estimators=2000] [samples per estimator=200]
 */
import { PlantFilter } from '../../simulators/src/plant-filter';
import { plantDesign } from '../../simulators/src/plant-models';
import { batchPayload, singlePayload } from '../../simulators/src/payload';
import { ServiceEvents } from '../src/events';
import { createLogger } from '../src/logger';
import { createMetrics } from '../src/metrics';
import type { BatchWriter, WriteParts } from '../src/pipeline/batch-writer';
import type { EstimatorInfo, EstimatorRegistry } from '../src/pipeline/estimator-registry';
import { IngestPipeline } from '../src/pipeline/ingest-pipeline';

const E = Number(process.argv[2] ?? 2000);
const PER = Number(process.argv[3] ?? 200);

async function run(batch: number): Promise<void> {
  const infos: EstimatorInfo[] = Array.from({ length: E }, (_, i) => ({
    id: i + 1,
    unitId: i + 1,
    unitKey: `unit-${i}`,
    key: 'position',
    siteId: 1,
    measurementDim: 2,
    expectedIntervalMs: 100,
    designRevisionId: 1,
  }));
  const byKey = new Map(infos.map((x) => [`${x.unitKey}/${x.key}`, x]));
  let stored = 0;
  let checkpointJsonBytes = 0;
  const writer = {
    write: async (p: WriteParts) => {
      stored += p.samples?.length ?? 0;
      for (const c of p.checkpoints ?? []) checkpointJsonBytes += JSON.stringify(c.state).length;
    },
    pendingSamples: () => 0,
  } as unknown as BatchWriter;
  const registry = { find: async (u: string, e: string) => byKey.get(`${u}/${e}`) } as unknown as EstimatorRegistry;
  const pipeline = new IngestPipeline({
    registry,
    writer,
    clock: { now: () => Date.now() },
    logger: createLogger('silent'),
    metrics: createMetrics(),
    events: new ServiceEvents(),
    loadCheckpoint: async () => null,
    unitIdOf: async () => 1,
  });
  const t0 = Date.now() - PER * 100;
  const filters = infos.map((x, i) => new PlantFilter({ design: plantDesign('tractor-position', 1), seed: i + 1, startTime: t0, reference: false }));
  const messages: { unit: string; payload: Buffer }[] = [];
  for (let k = 0; k < PER / batch; k++) {
    for (let i = 0; i < E; i++) {
      const samples = Array.from({ length: batch }, () => filters[i].next(t0 + filters[i].seq * 100));
      messages.push({ unit: infos[i].unitKey, payload: Buffer.from(batch === 1 ? singlePayload(samples[0], { rev: 1 }) : batchPayload(samples, { rev: 1 })) });
    }
  }
  const warm = Math.floor(messages.length / 10);
  for (let i = 0; i < warm; i++) await pipeline.handle(messages[i].unit, 'position', 'topic', messages[i].payload);
  const before = stored;
  const c0 = process.cpuUsage();
  for (let i = warm; i < messages.length; i++) await pipeline.handle(messages[i].unit, 'position', 'topic', messages[i].payload);
  const c = process.cpuUsage(c0);
  console.log(`${batch} sample(s) per message: ${((c.user + c.system) / (stored - before)).toFixed(1)} µs CPU per sample (IngestPipeline.handle, ${E} estimators)`);
  if (batch === 1) {
    const k0 = process.cpuUsage();
    await pipeline.checkpoint();
    const k = process.cpuUsage(k0);
    console.log(
      `checkpoint of ${E} estimators: ${(checkpointJsonBytes / 1e6).toFixed(1)} MB of JSON (${Math.round(checkpointJsonBytes / E).toLocaleString('en-US')} B each), ` +
        `${Math.round((k.user + k.system) / 1000)} ms CPU to serialize (before the pg driver escapes it and PostgreSQL parses it, in one statement)`,
    );
  }
}

(async () => {
  await run(1);
  await run(10);
})();
