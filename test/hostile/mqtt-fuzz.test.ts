// Property-based fuzz of innovation payloads through the real broker into the real
// database: arbitrary bytes, arbitrary JSON, near-miss objects, deep nesting, oversized
// payloads and valid payloads with mutations (wrong dimensions, NaN and Infinity as
// strings and as bare tokens, covariances that are not positive definite, numbers beyond
// float32 and double, missing, extra and mistyped fields, times that are not RFC 3339 …),
// every case one MQTT message, published with QoS 1 pipelining over one connection per unit.
//
// Properties, checked for every run of a few thousand cases:
// - the service is alive (its process has not exited) and answers /api/health with 200;
// - every message is acknowledged (the service never stops committing);
// - per estimator, the samples stored and the quarantine rows (by reason, with the bytes of
//   each payload) are exactly what the shared schema and the shared sample validation say,
//   worked out in this process for every case (test/support/mqtt-fuzz.ts);
// and at the end, every stored row is one of the samples the model takes as valid, with
// its time and (float32) innovation.
//
// Runs alternate between two sets of units, so that one run's messages are in flight
// while the next run is generated and the one before is checked (its units quiet by then).
//
// WHITECAP_FUZZ_CASES and WHITECAP_FUZZ_SEED change the number of cases and the seed; the
// seed is printed, and a failure names it.
import fc from 'fast-check';
import knexFactory, { type Knex } from 'knex';
import { innovationsTopic } from '../../ingest/src/broker/topics';
import { createTestDatabase, type TestDatabase } from '../support/database';
import { PayloadModel, asStoredFloat32, caseArbitrary, type FuzzCase, type Materialized, type Target } from '../support/mqtt-fuzz';
import { UnitPool, type PoolResult } from '../support/mqtt-pool';
import { runCli, startService, type ServiceHandle } from '../support/service';

const CASES = Number(process.env.WHITECAP_FUZZ_CASES ?? 100_000);
const CHUNK = 2500;
const SEED = Number(process.env.WHITECAP_FUZZ_SEED ?? Math.floor(Math.random() * 2 ** 31));
const WINDOW = 128;
const ACK_TIMEOUT_MS = 60_000;

jest.setTimeout(600_000);

/** The two sets of units runs alternate between; the same roles in each. */
const SETS = [
  { tractors: ['tractor-01', 'tractor-02'], cabinets: ['cabinet-01', 'cabinet-02'] },
  { tractors: ['tractor-03', 'tractor-04'], cabinets: ['cabinet-03', 'cabinet-04'] },
];
function targetsOf(set: (typeof SETS)[number]): Target[] {
  return [
    ...set.tractors.map((unit) => ({ unit, estimator: 'position', m: 2, n: 3, registered: true })),
    ...set.cabinets.flatMap((unit) => [
      { unit, estimator: 'thermal', m: 1, n: 2, registered: true },
      { unit, estimator: 'charge', m: 1, n: 1, registered: true },
    ]),
    { unit: set.tractors[1], estimator: 'no-such-estimator', m: 2, n: 0, registered: false },
    { unit: set.cabinets[0], estimator: 'ghost-7', m: 1, n: 0, registered: false },
  ];
}
const TARGETS = SETS.map(targetsOf);
const UNITS = SETS.map((s) => [...s.tractors, ...s.cabinets]);
const keyOf = (t: { unit: string; estimator: string }) => `${t.unit}/${t.estimator}`;

describe('hostile MQTT payloads: a property-based fuzz through the real broker', () => {
  let db: TestDatabase;
  let service: ServiceHandle;
  let knex: Knex;
  let pool: UnitPool;
  const model = new PayloadModel();
  const estimatorIds = new Map<string, number>();
  /** Every sample the model takes, by estimator id and sequence number. */
  const valid = new Map<string, { tMs: number; nu: number[] }>();
  /** Per set of units: the last quarantine row seen and the stored counts, as of its last check. */
  const lastQuarantineId = [0, 0];
  const storedSoFar: Map<number, number>[] = [new Map(), new Map()];
  const timing = { publishing: 0, model: 0, checks: 0, published: 0 };

  beforeAll(async () => {
    db = await createTestDatabase('hostile_mqtt_fuzz');
    await runCli('ingest/cli/seed.ts', [], { WHITECAP_DATABASE_URL: db.url });
    service = await startService({
      WHITECAP_DATABASE_URL: db.url,
      // this fuzz is a flood on purpose: the per-unit limit has its own tests
      WHITECAP_UNIT_MAX_SAMPLES_PER_SECOND: '1000000000',
      WHITECAP_UNIT_BURST_SAMPLES: '1000000000',
      WHITECAP_NOTIFICATIONS: 'false',
      WHITECAP_LOG_LEVEL: 'error',
    });
    knex = knexFactory({ client: 'pg', connection: db.url, pool: { min: 0, max: 2 } });
    const rows = await knex('estimators as e').join('units as u', 'u.id', 'e.unit_id').select('u.key as unit', 'e.key as estimator', 'e.id', 'e.measurement_dim');
    for (const r of rows) estimatorIds.set(keyOf(r), Number(r.id));
    for (const t of TARGETS.flat().filter((x) => x.registered)) {
      const row = rows.find((r) => keyOf(r) === keyOf(t));
      expect(row && Number(row.measurement_dim)).toBe(t.m);
    }
    pool = await UnitPool.connect(service.mqttPort, UNITS.flat());
  });

  afterAll(async () => {
    await pool?.end();
    await service?.stop();
    await knex?.destroy();
    await db?.drop();
  });

  const storedCounts = async (set: number): Promise<Map<number, number>> => {
    const ids = TARGETS[set].filter((t) => t.registered).map((t) => estimatorIds.get(keyOf(t))!);
    const rows = await knex('innovation_samples').whereIn('estimator_id', ids).groupBy('estimator_id').select('estimator_id', knex.raw('count(*)::int as n'));
    return new Map(rows.map((r) => [Number(r.estimator_id), Number(r.n)]));
  };

  /** The set's quarantine rows since its last check: by unit/estimator/reason, with the payload bytes they name. */
  const newQuarantine = async (set: number): Promise<Map<string, { rows: number; bytes: number }>> => {
    const rows = await knex('quarantine')
      .whereIn('unit_key', UNITS[set])
      .where('id', '>', lastQuarantineId[set])
      .groupBy('unit_key', 'estimator_key', 'reason_code')
      .select('unit_key', 'estimator_key', 'reason_code', knex.raw('count(*)::int as n'), knex.raw('sum(payload_bytes)::bigint as bytes'), knex.raw('max(id) as last'));
    const out = new Map<string, { rows: number; bytes: number }>();
    for (const r of rows) {
      out.set(`${r.unit_key}/${r.estimator_key}/${r.reason_code}`, { rows: Number(r.n), bytes: Number(r.bytes) });
      lastQuarantineId[set] = Math.max(lastQuarantineId[set], Number(r.last));
    }
    return out;
  };

  const expectAlive = async (when: string) => {
    if (service.process.exitCode !== null || service.process.signalCode !== null) {
      throw new Error(`the service exited (${service.process.exitCode ?? service.process.signalCode}) ${when}:\n${service.output().slice(-4000)}`);
    }
    const res = await fetch(`${service.url}/api/health`, { signal: AbortSignal.timeout(10_000) });
    if (res.status !== 200) throw new Error(`/api/health answered ${res.status} ${when}: ${await res.text()}`);
  };

  interface InFlight {
    set: number;
    label: string;
    batch: Materialized[];
    done: Promise<PoolResult>;
  }

  /** Starts publishing a run's messages (resolves when each is acknowledged or failed, or rejects after ACK_TIMEOUT_MS). */
  const start = (set: number, batch: Materialized[], label: string): InFlight => {
    const started = performance.now();
    let timer: NodeJS.Timeout | undefined;
    const done = Promise.race([
      pool.publishAll(
        batch.map((m) => ({ unit: m.fuzzCase.target.unit, topic: m.topic, payload: m.payload })),
        WINDOW,
      ),
      new Promise<never>((_, reject) => {
        timer = setTimeout(
          () => reject(new Error(`${label}: not every message was acknowledged within ${ACK_TIMEOUT_MS / 1000} s: the service stopped committing\n${service.output().slice(-3000)}`)),
          ACK_TIMEOUT_MS,
        );
      }),
    ]).finally(() => {
      clearTimeout(timer);
      timing.publishing += performance.now() - started;
      timing.published += batch.length;
    });
    done.catch(() => undefined); // awaited in finish(); no unhandled rejection meanwhile
    return { set, label, batch, done };
  };

  /** Waits for a run's acknowledgements, then checks the service against the model for that run's units. */
  const finish = async (run: InFlight) => {
    const result = await run.done;
    const checkStarted = performance.now();
    if (result.failed.length > 0) {
      const f = result.failed[0];
      throw new Error(`${run.label}: ${result.failed.length} publish(es) failed, first: ${f.error} on ${f.message.topic} (${f.message.payload.length} bytes)`);
    }
    await expectAlive(`after ${run.label}`);

    const expectedStored = new Map<string, number>();
    const expectedQuarantine = new Map<string, { rows: number; bytes: number }>();
    for (const m of run.batch) {
      const t = m.fuzzCase.target;
      expectedStored.set(keyOf(t), (expectedStored.get(keyOf(t)) ?? 0) + m.outcome.stored.length);
      for (const reason of m.outcome.quarantine) {
        const k = `${keyOf(t)}/${reason}`;
        const e = expectedQuarantine.get(k) ?? { rows: 0, bytes: 0 };
        e.rows += 1;
        e.bytes += m.payload.length;
        expectedQuarantine.set(k, e);
      }
    }
    const before = storedSoFar[run.set];
    const after = await storedCounts(run.set);
    storedSoFar[run.set] = after;
    const actualQuarantine = await newQuarantine(run.set);
    timing.checks += performance.now() - checkStarted;

    const problems: string[] = [];
    for (const t of TARGETS[run.set].filter((x) => x.registered)) {
      const id = estimatorIds.get(keyOf(t))!;
      const got = (after.get(id) ?? 0) - (before.get(id) ?? 0);
      const want = expectedStored.get(keyOf(t)) ?? 0;
      if (got !== want) problems.push(`${keyOf(t)}: ${got} samples stored, the model says ${want}`);
    }
    for (const k of new Set([...expectedQuarantine.keys(), ...actualQuarantine.keys()])) {
      const want = expectedQuarantine.get(k) ?? { rows: 0, bytes: 0 };
      const got = actualQuarantine.get(k) ?? { rows: 0, bytes: 0 };
      if (got.rows !== want.rows || got.bytes !== want.bytes) {
        problems.push(`quarantine ${k}: ${got.rows} rows naming ${got.bytes} payload bytes, the model says ${want.rows} rows, ${want.bytes} bytes`);
      }
    }
    if (problems.length > 0) {
      const concerned = (m: Materialized) => problems.some((p) => p.startsWith(`${keyOf(m.fuzzCase.target)}:`) || p.startsWith(`quarantine ${keyOf(m.fuzzCase.target)}/`));
      const suspects = run.batch
        .filter((m) => concerned(m) && (m.fuzzCase.mutations.length > 0 || m.fuzzCase.kind !== 'single'))
        .slice(0, 8)
        .map((m) => `  ${m.fuzzCase.kind} [${m.fuzzCase.mutations.join(', ')}] → ${JSON.stringify(m.outcome.samples)}: ${m.payload.subarray(0, 300).toString('utf8')}`);
      throw new Error(`${run.label}: the service and the model disagree:\n${problems.join('\n')}\nsome cases of the estimators concerned:\n${suspects.join('\n')}`);
    }
  };

  /** A case generated for set 0, moved to the same roles in `set`. */
  const moveTo = (c: FuzzCase, set: number): FuzzCase => {
    if (set === 0) return c;
    const i = TARGETS[0].findIndex((t) => t.unit === c.target.unit && t.estimator === c.target.estimator);
    return { ...c, target: TARGETS[set][i] };
  };

  const materializeAll = (cases: FuzzCase[]): Materialized[] => {
    const now = Date.now();
    const out = cases.map((c) => model.materialize(c, now));
    const wrong = out.filter((m) => m.intentProblems.length > 0);
    if (wrong.length > 0) {
      const lines = wrong.slice(0, 6).map((m) => `  ${m.fuzzCase.kind} [${m.fuzzCase.mutations.join(', ')}]: ${m.intentProblems.join('; ')}\n    ${m.payload.subarray(0, 400).toString('utf8')}`);
      throw new Error(`${wrong.length} case(s) where the shared validation and the generator's intent disagree:\n${lines.join('\n')}`);
    }
    for (const m of out) {
      const id = estimatorIds.get(keyOf(m.fuzzCase.target));
      for (const s of m.outcome.stored) valid.set(`${id}:${s.seq}`, { tMs: s.tMs, nu: s.nu });
    }
    return out;
  };

  it("fixes each estimator's reference-error size with one valid sample first (as a unit would)", async () => {
    const now = Date.now();
    for (const set of [0, 1]) {
      const warmUp = TARGETS[set]
        .filter((t) => t.registered)
        .map((t): Materialized => {
          const eye = (k: number) => Array.from({ length: k }, (_, r) => Array.from({ length: k }, (__, c) => (r === c ? 1 : 0)));
          const doc = { v: 1, seq: model.allocate(t), t: now - 60_000, nu: Array(t.m).fill(0.1), S: eye(t.m), e: Array(t.n).fill(0.2), P: eye(t.n) };
          const payload = Buffer.from(JSON.stringify(doc));
          const fuzzCase: FuzzCase = { kind: 'single', target: t, messageIntent: 'valid', sampleIntents: ['valid'], mutations: ['warm-up'] };
          return { fuzzCase, topic: innovationsTopic(t.unit, t.estimator), payload, outcome: model.expect(t, payload, now), intentProblems: [] };
        });
      for (const w of warmUp) {
        expect(w.outcome.samples).toEqual(['stored']);
        for (const s of w.outcome.stored) valid.set(`${estimatorIds.get(keyOf(w.fuzzCase.target))}:${s.seq}`, { tMs: s.tMs, nu: s.nu });
      }
      await finish(start(set, warmUp, `warm-up of set ${set}`));
    }
  });

  it(`takes ${CASES.toLocaleString('en')} hostile payloads without crashing, storing exactly the valid samples and quarantining the rest with their reasons`, async () => {
    const caseArb = fc.array(caseArbitrary(TARGETS[0]), { minLength: CHUNK, maxLength: CHUNK });
    let run = 0;
    let previous: InFlight | null = null;
    const started = performance.now();
    const kinds = new Map<string, number>();
    const mutations = new Map<string, number>();
    let storedExpected = 0;
    let quarantineExpected = 0;
    await fc.assert(
      fc.asyncProperty(caseArb, async (cases) => {
        run += 1;
        const set = run % 2;
        const modelStarted = performance.now();
        const batch = materializeAll(cases.map((c) => moveTo(c, set)));
        timing.model += performance.now() - modelStarted;
        for (const m of batch) {
          kinds.set(m.fuzzCase.kind, (kinds.get(m.fuzzCase.kind) ?? 0) + 1);
          for (const mu of m.fuzzCase.mutations) mutations.set(mu, (mutations.get(mu) ?? 0) + 1);
          storedExpected += m.outcome.stored.length;
          quarantineExpected += m.outcome.quarantine.length;
        }
        // the run before (the other set of units) must be done and right before this one starts
        if (previous) await finish(previous);
        previous = start(set, batch, `run ${run} (cases ${(run - 1) * CHUNK + 1}–${run * CHUNK})`);
      }),
      {
        numRuns: Math.ceil(CASES / CHUNK),
        seed: SEED,
        endOnFailure: true,
        reporter: (details) => {
          if (!details.failed) return;
          const err = details.errorInstance instanceof Error ? details.errorInstance.message : String(details.errorInstance);
          throw new Error(`fuzz failed (seed ${SEED}, WHITECAP_FUZZ_SEED=${SEED} to repeat) after ${details.numRuns} run(s) of ${CHUNK} cases:\n${err}`);
        },
      },
    );
    if (previous) await finish(previous);
    const totalMs = performance.now() - started;
    const cases = run * CHUNK;
    console.log(
      `mqtt fuzz (seed ${SEED}): ${cases.toLocaleString('en')} cases in ${(totalMs / 1000).toFixed(1)} s, ` +
        `${Math.round(cases / (totalMs / 1000)).toLocaleString('en')} cases/s (each one MQTT message, QoS 1, ${UNITS[0].length} connections × ${WINDOW} in flight per run); ` +
        `${storedExpected.toLocaleString('en')} samples stored, ${quarantineExpected.toLocaleString('en')} quarantine rows\n` +
        `time spent: publishing ${(timing.publishing / 1000).toFixed(1)} s (${Math.round(timing.published / (timing.publishing / 1000)).toLocaleString('en')} messages/s), ` +
        `model ${(timing.model / 1000).toFixed(1)} s, checks ${(timing.checks / 1000).toFixed(1)} s (generation overlaps publishing)\n` +
        `kinds: ${JSON.stringify(Object.fromEntries(kinds))}\nmutations: ${JSON.stringify(Object.fromEntries([...mutations].sort((a, b) => b[1] - a[1])))}`,
    );
    expect(cases).toBeGreaterThanOrEqual(CASES);
    // the fuzz must exercise both sides: plenty stored, plenty refused
    expect(storedExpected).toBeGreaterThan(cases / 10);
    expect(quarantineExpected).toBeGreaterThan(cases / 4);
  });

  it('stored only samples the model takes as valid, each with its time and innovation, and kept every quarantined payload (capped at 4 KiB)', async () => {
    const rows = await knex('innovation_samples')
      .whereIn('estimator_id', [...new Set(TARGETS.flat().filter((t) => t.registered).map((t) => estimatorIds.get(keyOf(t))!))])
      .select('estimator_id', 'seq', knex.raw('extract(epoch from t)::float8 * 1000 as t_ms'), 'nu');
    expect(rows.length).toBe(valid.size);
    const bad: string[] = [];
    for (const r of rows) {
      const v = valid.get(`${r.estimator_id}:${r.seq}`);
      if (!v) {
        bad.push(`estimator ${r.estimator_id} seq ${r.seq}: stored, but no valid sample has that number`);
        continue;
      }
      if (Math.abs(Number(r.t_ms) - v.tMs) >= 1) bad.push(`estimator ${r.estimator_id} seq ${r.seq}: t ${r.t_ms} stored, ${v.tMs} sent`);
      const nu = r.nu as Buffer;
      if (nu.length !== 4 * v.nu.length) bad.push(`estimator ${r.estimator_id} seq ${r.seq}: ${nu.length / 4} innovation components stored, ${v.nu.length} sent`);
      else
        for (let i = 0; i < v.nu.length; i++) {
          const got = nu.readFloatLE(4 * i);
          if (!Object.is(got, asStoredFloat32(v.nu[i]))) bad.push(`estimator ${r.estimator_id} seq ${r.seq}: nu[${i}] ${got} stored, ${v.nu[i]} sent`);
        }
      if (bad.length > 10) break;
    }
    expect(bad).toEqual([]);
    const capped = await knex('quarantine').whereRaw('length(payload) <> least(payload_bytes, 4096)').count<{ count: string }[]>('* as count');
    expect(Number(capped[0].count)).toBe(0);
    await expectAlive('at the end');
  });
});
