// Two ingest workers share the fleet's partitions behind Debian's mosquitto, and one of
// them is killed mid-stream. 40 tractors (in 8 partitions, as provisioned) publish QoS 1
// batches to their partition topics throughout. Worker A starts alone and claims all 8
// partitions; worker B joins and A hands it 4 (checkpoints written, then the locks
// released); B is killed (SIGKILL) and A takes its 4 partitions back within seconds,
// resuming their checks from B's last checkpoints.
//
// What must hold: every sample mosquitto acknowledged is stored exactly once; each
// partition was held by one worker at a time (partition_claims); no estimator's checks
// were split between workers or restarted: every estimator's checkpointed samples_seen
// only ever grows; for the partitions that never moved it equals the samples stored;
// for those that moved, the survivor's final count is B's last checkpoint plus what the
// survivor itself checked after it.
//
// Then a third worker's own database session is cut (pg_terminate_backend): it lets go of
// every partition at once without writing, opens a new session, claims them all again and
// resumes from the checkpoints; again every acknowledged sample is stored once.
import { randomBytes } from 'node:crypto';
import knexFactory, { type Knex } from 'knex';
import { partitionedInnovationsTopic, unitPartition } from '../../ingest/src/broker/topics';
import { demoDeviceSecret } from '../../ingest/src/demo/saltmarsh';
import { PlantFilter, batchPayload, plantDesign } from '../../simulators/src/index';
import { createTestDatabase, type TestDatabase } from '../support/database';
import { compareWithStored, demoLoadUnits, storedSamples } from '../support/fleet-load';
import { Mosquitto } from '../support/mosquitto';
import { connectUnit, endClient, publishAcked } from '../support/mqtt';
import { PartitionedLoad } from '../support/partitioned-load';
import { runCli, startService, type ServiceHandle } from '../support/service';
import { sleep, waitFor } from '../support/watch';

jest.setTimeout(150_000);

const PARTITIONS = 8;
const BATCH = 5;
const WINDOW = 2;

interface PartitionsAnswer {
  worker: string;
  count: number;
  claimed: number[];
  liveWorkers: number;
  session: boolean;
}

async function partitionsOf(url: string): Promise<PartitionsAnswer | null> {
  const res = await fetch(`${url}/api/health`, { signal: AbortSignal.timeout(5000) });
  const body = (await res.json()) as { partitions?: PartitionsAnswer };
  return body.partitions ?? null;
}

interface Checkpoint {
  samples: number;
  lastSeq: number;
  savedAt: number;
}

describe('faults: partitioned ingest workers behind mosquitto', () => {
  let db: TestDatabase;
  let knex: Knex;
  let broker: Mosquitto;
  let a: ServiceHandle | null = null;
  let b: ServiceHandle | null = null;
  let load: PartitionedLoad | null = null;
  let c: ServiceHandle | null = null;
  let load2: PartitionedLoad | null = null;
  let polling = false;
  let poller: Promise<void> | null = null;

  beforeAll(async () => {
    db = await createTestDatabase('faults_scale_out');
    await runCli('ingest/cli/seed.ts', [], { WHITECAP_DATABASE_URL: db.url, WHITECAP_PARTITIONS: String(PARTITIONS) });
    knex = knexFactory({ client: 'pg', connection: db.url, pool: { min: 0, max: 3 } });
    broker = await Mosquitto.start('scale-out');
  });
  afterAll(async () => {
    polling = false;
    await poller;
    await load?.close();
    await load2?.close();
    await a?.stop('SIGKILL');
    await b?.stop('SIGKILL');
    await c?.stop('SIGKILL');
    await broker?.destroy();
    await knex?.destroy();
    await db?.drop();
  });

  const checkpoints = async (ids: number[]): Promise<Map<number, Checkpoint>> => {
    const rows = await knex('estimator_checkpoints')
      .whereIn('estimator_id', ids)
      .select<{ estimator_id: number; samples_seen: string; last_seq: string | null; saved_at: Date }[]>(
        'estimator_id',
        'samples_seen',
        knex.raw(`(state->'last'->>'seq')::bigint as last_seq`),
        'saved_at',
      );
    return new Map(rows.map((r) => [Number(r.estimator_id), { samples: Number(r.samples_seen), lastSeq: Number(r.last_seq ?? -1), savedAt: new Date(r.saved_at).getTime() }]));
  };

  it('hands partitions over on joining and on death: every acknowledged sample stored once, no estimator split', async () => {
    // The tractors and the partitions they were provisioned in.
    const unitRows = await knex('units').where('key', 'like', 'tractor-%').select<{ key: string; partition: number }[]>('key', 'partition');
    const partitionOf = new Map(unitRows.map((r) => [r.key, Number(r.partition)]));
    expect(partitionOf.size).toBe(40);
    for (const [key, p] of partitionOf) expect(p).toBe(unitPartition(key, PARTITIONS));
    expect(new Set(partitionOf.values()).size).toBe(PARTITIONS);
    const estimators = await knex('estimators as e')
      .join('units as u', 'u.id', 'e.unit_id')
      .where('u.key', 'like', 'tractor-%')
      .select<{ id: number; unit: string; key: string }[]>('e.id', 'u.key as unit', 'e.key');
    const ids = estimators.map((e) => Number(e.id));
    const streamOf = new Map(estimators.map((e) => [Number(e.id), `${e.unit}/${e.key}`]));
    const partitionOfEstimator = (id: number) => partitionOf.get(streamOf.get(id)!.split('/')[0])!;

    const prefix = `scale-${randomBytes(3).toString('hex')}-`;
    const env = (worker: string) => ({
      WHITECAP_DATABASE_URL: db.url,
      WHITECAP_EXTERNAL_MQTT_URL: broker.url,
      WHITECAP_PARTITIONED: 'true',
      WHITECAP_PARTITIONS: String(PARTITIONS),
      WHITECAP_PARTITION_CLIENT_PREFIX: prefix,
      WHITECAP_WORKER_ID: worker,
      WHITECAP_CHECKPOINT_EVERY_MS: '1000',
      WHITECAP_NOTIFICATIONS: 'false',
    });

    // 1. Worker A alone: it claims every partition (and so subscribes each partition's session).
    a = await startService(env('worker-a'));
    await waitFor('worker A holding all 8 partitions', async () => (await partitionsOf(a!.url))?.claimed.length === PARTITIONS, 30_000, 200);

    // Every estimator's checkpointed samples_seen, read four times a second throughout.
    const history = new Map<number, number[]>();
    polling = true;
    poller = (async () => {
      while (polling) {
        try {
          for (const [id, c] of await checkpoints(ids)) {
            const h = history.get(id) ?? [];
            if (h[h.length - 1] !== c.samples) h.push(c.samples);
            history.set(id, h);
          }
        } catch {
          /* a missed reading */
        }
        await sleep(250);
      }
    })();

    // 40 tractors, a batch of 5 samples every 100 ms each: 2,000 samples/s.
    const units = demoLoadUnits((k) => k.startsWith('tractor-')).map((u) => ({ ...u, partition: partitionOf.get(u.key)! }));
    load = new PartitionedLoad({ url: broker.url, units, batchSize: BATCH, intervalMs: 100, window: WINDOW, startTime: Date.now() - 2 * 3_600_000 });
    await load.connect();
    load.start();
    const storedCount = async () => [...(await storedSamples(knex, [...partitionOf.keys()]))].reduce((n, [, m]) => n + m.size, 0);
    await waitFor('3,000 samples stored by worker A', async () => (await storedCount()) >= 3000, 30_000, 250);

    // 2. Worker B joins: A lets go of its share beyond ceil(8 / 2) = 4, B claims them.
    b = await startService(env('worker-b'));
    const joinedAt = Date.now();
    const split = await waitFor(
      'the partitions split 4 and 4 between A and B',
      async () => {
        const [pa, pb] = await Promise.all([partitionsOf(a!.url), partitionsOf(b!.url)]);
        if (pa?.claimed.length !== 4 || pb?.claimed.length !== 4) return null;
        return { a: pa.claimed, b: pb.claimed, live: [pa.liveWorkers, pb.liveWorkers] };
      },
      30_000,
      200,
    );
    const splitMs = Date.now() - joinedAt;
    expect([...split.a, ...split.b].sort()).toEqual([0, 1, 2, 3, 4, 5, 6, 7]);
    expect(split.live).toEqual([2, 2]);
    const ackedBeforeB = load.ackedSampleCount();
    await waitFor('B taking messages', async () => load!.ackedSampleCount() >= ackedBeforeB + 6000 && (await storedCount()) >= ackedBeforeB + 4000, 30_000, 250);

    // 3. B dies mid-stream.
    const highestAtKill = load.highestAcked();
    await b.stop('SIGKILL');
    const killedAt = Date.now();
    b = null;
    const atKill = await checkpoints(ids);
    const reclaimMs = await waitFor(
      'worker A holding all 8 partitions again',
      async () => {
        const pa = await partitionsOf(a!.url);
        return pa?.claimed.length === PARTITIONS && pa.liveWorkers === 1 ? Date.now() - killedAt : null;
      },
      20_000,
      50,
    );
    const ackedAtReclaim = load.ackedSampleCount();
    await waitFor('3,000 more samples acknowledged', () => load!.ackedSampleCount() >= ackedAtReclaim + 3000, 30_000, 100);
    load.pause();
    expect(await load.drain(20_000)).toBe(true);
    const acked = load.ackedSamples();
    await waitFor(
      'every acknowledged sample stored',
      async () => compareWithStored(acked, await storedSamples(knex, [...partitionOf.keys()])).missing.length === 0,
      30_000,
      250,
    );

    // 4. A unit publishing on another partition's topic is refused (wrong_partition), on its own it is taken.
    const probeUnit = 'cabinet-01';
    const own = unitPartition(probeUnit, PARTITIONS);
    const probe = new PlantFilter({ design: plantDesign('cabinet-thermal'), seed: 5, startTime: Date.now() - 3_600_000, reference: false });
    const client = await connectUnit(broker.port, probeUnit, demoDeviceSecret(probeUnit));
    const wrong = probe.next();
    const right = probe.next();
    await publishAcked(client, partitionedInnovationsTopic((own + 1) % PARTITIONS, probeUnit, 'thermal'), batchPayload([wrong]));
    await publishAcked(client, partitionedInnovationsTopic(own, probeUnit, 'thermal'), batchPayload([right]));
    await endClient(client);
    const refused = await waitFor(
      'the wrong-partition message quarantined',
      async () => (await knex('quarantine').where({ unit_key: probeUnit, reason_code: 'wrong_partition' }).select('topic', 'reason'))[0],
      20_000,
      200,
    );
    expect(refused.topic).toBe(partitionedInnovationsTopic((own + 1) % PARTITIONS, probeUnit, 'thermal'));
    await waitFor('the right-partition sample stored', async () => (await storedSamples(knex, [probeUnit])).get(`${probeUnit}/thermal`)?.has(right.seq), 20_000, 200);
    expect((await storedSamples(knex, [probeUnit])).get(`${probeUnit}/thermal`)?.has(wrong.seq)).toBe(false);

    // 5. A stops: every partition released, checkpoints committed first.
    expect(await a.stop('SIGTERM')).toBe(0);
    a = null;
    polling = false;
    await poller;
    const final = await checkpoints(ids);
    const stored = await storedSamples(knex, [...partitionOf.keys()]);

    // Every acknowledged sample stored exactly once, and nothing stored that was not acknowledged.
    const cmp = compareWithStored(acked, stored);
    expect(cmp.missing).toEqual([]);
    expect(cmp.duplicates).toEqual([]);
    expect(cmp.storedCount).toBe(cmp.ackedCount);
    expect(load.connectionsLost).toBe(0);
    expect(load.publishErrors).toBe(0);
    const [{ n: tractorsQuarantined }] = await knex('quarantine').where('unit_key', 'like', 'tractor-%').count<{ n: string | number }[]>('* as n');
    expect(Number(tractorsQuarantined)).toBe(0);
    expect(broker.droppedMessages()).toEqual([]);

    // One holder per partition at any time: A, then (for B's four) B, then A again.
    const claims = await knex('partition_claims').orderBy([{ column: 'partition' }, { column: 'claimed_at' }]).select<
      { partition: number; worker_id: string; claimed_at: Date; released_at: Date | null; release_reason: string | null }[]
    >('partition', 'worker_id', 'claimed_at', 'released_at', 'release_reason');
    const reclaimedAt = new Map<number, number>();
    const claimedByB = new Map<number, number>();
    for (let p = 0; p < PARTITIONS; p++) {
      const rows = claims.filter((c) => Number(c.partition) === p);
      for (let k = 0; k < rows.length; k++) {
        expect(rows[k].released_at).not.toBeNull();
        expect(rows[k].released_at!.getTime()).toBeGreaterThanOrEqual(rows[k].claimed_at.getTime());
        if (k > 0) expect(rows[k].claimed_at.getTime()).toBeGreaterThanOrEqual(rows[k - 1].released_at!.getTime());
      }
      const trail = rows.map((r) => `${r.worker_id}:${r.release_reason}`);
      if (split.b.includes(p)) {
        expect(trail).toEqual(['worker-a:rebalance', 'worker-b:holder gone', 'worker-a:shutdown']);
        claimedByB.set(p, rows[1].claimed_at.getTime());
        reclaimedAt.set(p, rows[2].claimed_at.getTime());
      } else {
        expect(trail).toEqual(['worker-a:shutdown']);
      }
    }
    expect(reclaimMs).toBeLessThan(10_000);

    // No estimator's checks split or restarted.
    const countsOf = (id: number) => stored.get(streamOf.get(id)!)!;
    let kept = 0;
    let moved = 0;
    for (const id of ids) {
      const h = history.get(id) ?? [];
      for (let k = 1; k < h.length; k++) expect(h[k]).toBeGreaterThan(h[k - 1]);
      const f = final.get(id)!;
      const seqs = [...countsOf(id).keys()];
      expect(f.lastSeq).toBe(Math.max(...seqs));
      const p = partitionOfEstimator(id);
      if (split.a.includes(p)) {
        // Checked by A alone from first sample to last: it counted each stored sample once.
        expect({ id, samplesSeen: f.samples }).toEqual({ id, samplesSeen: seqs.length });
        kept += 1;
      } else {
        // B's last checkpoint (saved after B claimed the partition, before A took it back) …
        const c0 = atKill.get(id)!;
        expect(c0.savedAt).toBeGreaterThan(claimedByB.get(p)!);
        expect(c0.savedAt).toBeLessThan(reclaimedAt.get(p)!);
        // … plus what A checked after it: the samples after the checkpoint, less those B
        // checked and got acknowledged after its checkpoint and before dying (at most what
        // mosquitto had taken in by then, its acknowledgements plus one window in flight).
        const added = f.samples - c0.samples;
        const stream = streamOf.get(id)!;
        expect(added).toBeLessThanOrEqual(f.lastSeq - c0.lastSeq);
        expect(added).toBeGreaterThanOrEqual(f.lastSeq - ((highestAtKill.get(stream) ?? c0.lastSeq) + WINDOW * BATCH));
        expect(added).toBeGreaterThan(0);
        moved += 1;
      }
    }
    expect(kept).toBeGreaterThan(0);
    expect(moved).toBeGreaterThan(0);
    await load.close();
    load = null;

    const reclaimDb = Math.max(...[...reclaimedAt.values()].map((t) => t - killedAt));
    console.log(
      `[faults] scale-out: ${cmp.ackedCount} samples acknowledged by mosquitto, all stored once; partitions split 4/4 ${splitMs} ms after B started ` +
        `(A: ${split.a.join(',')}; B: ${split.b.join(',')}); B killed, A held all 8 again after ${reclaimMs} ms ` +
        `(claims recorded ≤ ${reclaimDb} ms after the kill); ${kept} estimators never moved (samples_seen = samples stored), ` +
        `${moved} moved twice (samples_seen resumed from B's last checkpoint, monotone throughout)`,
    );
  });

  it('a worker whose database session is cut lets go of every partition at once, then claims them again from the checkpoints', async () => {
    // The battery cabinets this time (fresh streams; cabinet-01 served as a probe above).
    const unitRows = await knex('units').where('key', 'like', 'cabinet-%').whereNot({ key: 'cabinet-01' }).select<{ key: string; partition: number }[]>('key', 'partition');
    const unitKeys = unitRows.map((r) => r.key);
    const estimators = await knex('estimators as e')
      .join('units as u', 'u.id', 'e.unit_id')
      .whereIn('u.key', unitKeys)
      .select<{ id: number; unit: string; key: string }[]>('e.id', 'u.key as unit', 'e.key');
    const ids = estimators.map((e) => Number(e.id));
    const streamOf = new Map(estimators.map((e) => [Number(e.id), `${e.unit}/${e.key}`]));
    const prefix = `cut-${randomBytes(3).toString('hex')}-`;
    c = await startService({
      WHITECAP_DATABASE_URL: db.url,
      WHITECAP_EXTERNAL_MQTT_URL: broker.url,
      WHITECAP_PARTITIONED: 'true',
      WHITECAP_PARTITIONS: String(PARTITIONS),
      WHITECAP_PARTITION_CLIENT_PREFIX: prefix,
      WHITECAP_WORKER_ID: 'worker-c',
      WHITECAP_CHECKPOINT_EVERY_MS: '1000',
      WHITECAP_NOTIFICATIONS: 'false',
    });
    await waitFor('worker C holding all 8 partitions', async () => (await partitionsOf(c!.url))?.claimed.length === PARTITIONS, 30_000, 200);
    const history = new Map<number, number[]>();
    polling = true;
    poller = (async () => {
      while (polling) {
        try {
          for (const [id, cp] of await checkpoints(ids)) {
            const h = history.get(id) ?? [];
            if (h[h.length - 1] !== cp.samples) h.push(cp.samples);
            history.set(id, h);
          }
        } catch {
          /* a missed reading */
        }
        await sleep(250);
      }
    })();
    const units = demoLoadUnits((k) => unitKeys.includes(k)).map((u) => ({ ...u, partition: Number(unitRows.find((r) => r.key === u.key)!.partition) }));
    load2 = new PartitionedLoad({ url: broker.url, units, batchSize: BATCH, intervalMs: 100, window: WINDOW, startTime: Date.now() - 2 * 3_600_000 });
    await load2.connect();
    load2.start();
    const storedCount = async () => [...(await storedSamples(knex, unitKeys))].reduce((n, [, m]) => n + m.size, 0);
    await waitFor('2,000 cabinet samples stored', async () => (await storedCount()) >= 2000, 30_000, 250);

    // Cut the worker's own database session (its pool's connections stay).
    const [worker] = await knex('ingest_workers').where({ worker_id: 'worker-c' }).select<{ backend_pid: number }[]>('backend_pid');
    const before = await knex('partition_claims').where({ worker_id: 'worker-c' }).whereNull('released_at').pluck('incarnation');
    expect(new Set(before).size).toBe(1);
    expect(before).toHaveLength(PARTITIONS);
    const [{ ok }] = (await knex.raw('select pg_terminate_backend(?) as ok', [worker.backend_pid])).rows;
    expect(ok).toBe(true);
    const cutAt = Date.now();
    const reclaimMs = await waitFor(
      'worker C holding all 8 partitions again on a new session',
      async () => {
        const open = await knex('partition_claims').where({ worker_id: 'worker-c' }).whereNull('released_at').pluck('incarnation');
        return open.length === PARTITIONS && !open.includes(before[0]) ? Date.now() - cutAt : null;
      },
      20_000,
      50,
    );
    const text = await (await fetch(`${c.url}/metrics`)).text();
    expect(text).toMatch(/^whitecap_partition_releases_total\{reason="lost"\} 8$/m);
    const ackedAtReclaim = load2.ackedSampleCount();
    await waitFor('1,500 more samples acknowledged', () => load2!.ackedSampleCount() >= ackedAtReclaim + 1500, 30_000, 100);
    load2.pause();
    expect(await load2.drain(20_000)).toBe(true);
    const acked = load2.ackedSamples();
    await waitFor('every acknowledged sample stored', async () => compareWithStored(acked, await storedSamples(knex, unitKeys)).missing.length === 0, 30_000, 250);
    expect(await c.stop('SIGTERM')).toBe(0);
    c = null;
    polling = false;
    await poller;

    const stored = await storedSamples(knex, unitKeys);
    const cmp = compareWithStored(acked, stored);
    expect(cmp.missing).toEqual([]);
    expect(cmp.duplicates).toEqual([]);
    expect(cmp.storedCount).toBe(cmp.ackedCount);
    expect(load2.connectionsLost).toBe(0);
    expect(load2.publishErrors).toBe(0);
    expect(broker.droppedMessages()).toEqual([]);

    // The lost session's claims were closed by the next one; each partition had one holder at a time.
    const rows = await knex('partition_claims').where({ worker_id: 'worker-c' }).orderBy([{ column: 'partition' }, { column: 'claimed_at' }]).select<
      { partition: number; incarnation: string; claimed_at: Date; released_at: Date | null; release_reason: string | null }[]
    >('partition', 'incarnation', 'claimed_at', 'released_at', 'release_reason');
    for (let p = 0; p < PARTITIONS; p++) {
      const trail = rows.filter((r) => Number(r.partition) === p);
      expect(trail.map((r) => r.release_reason)).toEqual(['holder gone', 'shutdown']);
      expect(trail[0].incarnation).toBe(before[0]);
      expect(trail[1].claimed_at.getTime()).toBeGreaterThanOrEqual(trail[0].released_at!.getTime());
    }
    // Each partition's MQTT session was left and taken up again (mosquitto's log).
    const log = broker.log();
    for (let p = 0; p < PARTITIONS; p++) {
      const connects = log.split('\n').filter((l) => l.includes(`New client connected`) && l.includes(` as ${prefix}whitecap-partition-${p} `));
      expect({ p, connects: connects.length }).toEqual({ p, connects: 2 });
    }
    // The checks resumed from their checkpoints, never from nothing, and counted no sample twice.
    const final = await checkpoints(ids);
    for (const id of ids) {
      const h = history.get(id) ?? [];
      for (let k = 1; k < h.length; k++) expect(h[k]).toBeGreaterThan(h[k - 1]);
      const storedOfStream = stored.get(streamOf.get(id)!)?.size ?? 0;
      expect(storedOfStream).toBeGreaterThan(0);
      expect(final.get(id)!.samples).toBeLessThanOrEqual(storedOfStream);
      expect(final.get(id)!.samples).toBeGreaterThan(0);
    }
    console.log(
      `[faults] scale-out: worker C's database session cut; it let go of all 8 partitions (releases "lost": 8) and held them again on a new session ${reclaimMs} ms later; ` +
        `${cmp.ackedCount} cabinet samples acknowledged, all stored once`,
    );
  });
});
