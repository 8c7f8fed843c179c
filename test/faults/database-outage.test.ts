// PostgreSQL is stopped for 30 s mid-stream and started again, on a cluster of this
// test's own. While it is down the service answers 503 on /api/health, acknowledges
// nothing (a PUBACK means "committed"), keeps its write queue within
// WHITECAP_MAX_QUEUED_SAMPLES by holding the units' messages, and keeps the alert a
// fault raised during the outage; once the database is back every acknowledged sample is
// stored exactly once and the alert is in the database with the time it was raised.
import knexFactory, { type Knex } from 'knex';
import type { MqttClient } from 'mqtt';
import { innovationsTopic } from '../../ingest/src/broker/topics';
import { demoDeviceSecret } from '../../ingest/src/demo/saltmarsh';
import { PlantFilter, batchPayload, plantDesign, type SimulatedSample } from '../../simulators/src/index';
import { compareWithStored, demoLoadUnits, FleetLoad, storedSamples } from '../support/fleet-load';
import { connectUnit, endClient, publishAcked } from '../support/mqtt';
import { OwnPostgres } from '../support/own-postgres';
import { startService, type ServiceHandle } from '../support/service';
import { health, metrics, metricValue, rssMb, sampleEvery, sleep, waitFor, type HealthAnswer } from '../support/watch';

jest.setTimeout(200_000);

const BOUND = 10_000;
const OUTAGE_MS = 30_000;
const FAULTY = { unit: 'cabinet-05', estimator: 'thermal' };

describe('faults: PostgreSQL stopped for 30 s mid-stream', () => {
  let pg: OwnPostgres;
  let service: ServiceHandle | null = null;
  let load: FleetLoad | null = null;
  let unit: MqttClient | null = null;
  let watch: { stop(): Promise<void> } | null = null;
  const knexes: Knex[] = [];
  const connect = () => {
    const k = knexFactory({ client: 'pg', connection: pg.url, pool: { min: 0, max: 2 } });
    knexes.push(k);
    return k;
  };

  beforeAll(async () => {
    pg = await OwnPostgres.create('outage');
  });
  afterAll(async () => {
    await watch?.stop();
    if (unit) await endClient(unit);
    await load?.close();
    await service?.stop('SIGKILL');
    for (const k of knexes) await k.destroy().catch(() => undefined);
    await pg?.destroy();
  });

  it('holds messages within the bound, answers 503, loses no acknowledged sample and no alert', async () => {
    service = await startService({
      WHITECAP_DATABASE_URL: pg.url,
      WHITECAP_MAX_QUEUED_SAMPLES: String(BOUND),
      WHITECAP_HEALTH_TIMEOUT_MS: '1000',
      WHITECAP_CHECKPOINT_EVERY_MS: '1000',
      WHITECAP_STATUS_EVERY_MS: '500',
      WHITECAP_NOTIFICATIONS: 'false',
    });
    const pid = service.process.pid;
    const units = demoLoadUnits((key) => key !== FAULTY.unit);
    // 51 units, a batch of 5 samples every 200 ms each (about 1,300 samples/s), each with
    // up to 100 messages awaiting PUBACK: during the outage they have more than twice the
    // bound in flight, and the write queue reaches its bound within seconds.
    load = new FleetLoad({ url: `mqtt://127.0.0.1:${service.mqttPort}`, units, batchSize: 5, window: 100, intervalMs: 200 });
    await load.connect();
    load.start();

    // The faulty unit's estimator streams clean samples before the outage.
    const filter = new PlantFilter({
      design: plantDesign('cabinet-thermal'),
      seed: 7,
      startTime: Date.now() - 600_000,
      faults: [{ kind: 'noise', factor: 4, when: { fromSeq: 201 } }],
    });
    const faulty: SimulatedSample[] = Array.from({ length: 500 }, () => filter.next());
    unit = await connectUnit(service.mqttPort, FAULTY.unit, demoDeviceSecret(FAULTY.unit));
    const topic = innovationsTopic(FAULTY.unit, FAULTY.estimator);
    await publishAcked(unit, topic, batchPayload(faulty.slice(0, 200)));

    await waitFor('2,000 samples acknowledged', () => load!.ackedSampleCount() >= 2000, 30_000);
    const before = await health(service.url);
    expect(before.status).toBe(200);
    const baselineRss = rssMb(pid);

    // Watch throughout: health, write queue and memory, every 250 ms.
    const watching = sampleEvery(250, async () => {
      let answer: HealthAnswer | null = null;
      try {
        answer = await health(service!.url);
      } catch {
        /* counted as no answer */
      }
      return {
        status: answer?.status ?? 0,
        queue: answer?.body.pipeline?.writeQueueSamples ?? NaN,
        failing: answer?.body.pipeline?.writesFailing ?? false,
        rss: rssMb(pid),
      };
    });
    watch = watching;

    // Down.
    const downAt = Date.now();
    pg.stop('fast');
    const stoppedAt = Date.now();
    // A fault during the outage: the checks see it now; the alert waits for the database.
    const faultAcked = publishAcked(unit, topic, batchPayload(faulty.slice(200))).then(() => Date.now());
    faultAcked.catch(() => undefined);
    await waitFor('a 503 from /api/health', async () => (await health(service!.url)).status === 503, 10_000).catch((err: Error) => {
      throw new Error(`${err.message}; service ${service!.process.exitCode === null ? 'running' : `exited with ${service!.process.exitCode}`}:\n${service!.output().slice(-3000)}`);
    });
    const down = await health(service.url);
    expect(down.body.database.up).toBe(false);
    await sleep(3000);
    const ackedEarlyInOutage = load.ackedSampleCount();
    await sleep(Math.max(0, downAt + OUTAGE_MS - Date.now()));
    const ackedLateInOutage = load.ackedSampleCount();
    const unackedPeak = load.unacknowledged();
    const m = await metrics(service.url);
    const held = metricValue(m, 'whitecap_publish_held_total');

    // Up again.
    const upAt = Date.now();
    pg.start();
    const startedAt = Date.now();
    await waitFor('a 200 from /api/health', async () => (await health(service!.url)).status === 200, 30_000);
    const healthyAfterMs = Date.now() - startedAt;
    const faultAckedAt = await faultAcked;
    await endClient(unit);
    unit = null;
    const resumedFrom = load.ackedSampleCount();
    await waitFor('the units caught up', () => load!.ackedSampleCount() >= resumedFrom + 5000, 60_000);
    load.pause();
    expect(await load.drain(60_000)).toBe(true);
    await load.close();
    await watching.stop();
    expect(await service.stop('SIGTERM')).toBe(0);
    service = null;

    // While down: 503 throughout (from the first failed check until the restart), nothing
    // acknowledged, messages held, the write queue within its bound.
    const r = watching.readings;
    const outage = r.filter((x) => x.at > stoppedAt + 5000 && x.at < upAt);
    expect(outage.length).toBeGreaterThan(20);
    expect(outage.filter((x) => x.value.status !== 503)).toEqual([]);
    expect(outage.filter((x) => !x.value.failing)).toEqual([]);
    expect(ackedLateInOutage).toBe(ackedEarlyInOutage);
    expect(held).toBeGreaterThan(0);
    const maxQueue = Math.max(...r.map((x) => x.value.queue).filter(Number.isFinite));
    // The bound, plus what the messages being taken when it was reached may carry.
    expect(maxQueue).toBeGreaterThan(BOUND * 0.5);
    expect(maxQueue).toBeLessThanOrEqual(BOUND * 1.1);
    // More than the bound was waiting: the rest was held at the units.
    expect(unackedPeak).toBeGreaterThan(BOUND / 5);
    const maxRss = Math.max(...r.map((x) => x.value.rss).filter(Number.isFinite));
    expect(maxRss).toBeLessThan(baselineRss + 200);
    // The fault's message was acknowledged only once the database was back.
    expect(faultAckedAt).toBeGreaterThanOrEqual(upAt);

    // After: every acknowledged sample stored once; the faulty estimator's samples too.
    const knex = connect();
    const stored = await storedSamples(knex);
    const acked = new Map<string, Set<number> | number[]>(load.ackedSamples());
    acked.set(`${FAULTY.unit}/${FAULTY.estimator}`, faulty.map((s) => s.seq));
    const result = compareWithStored(acked, stored);
    expect(result.missing).toEqual([]);
    expect(result.duplicates).toEqual([]);
    expect(result.storedCount).toBe(result.ackedCount);

    // The alert raised during the outage is stored, with the time it was raised. (The unit
    // falls quiet after its fault: a silence alert follows once the service has caught up.)
    const alerts = await knex('alerts as a')
      .join('estimators as e', 'e.id', 'a.estimator_id')
      .join('units as u', 'u.id', 'e.unit_id')
      .where({ 'u.key': FAULTY.unit, 'e.key': FAULTY.estimator })
      .whereNot({ 'a.rule': 'silence' })
      .select('a.id', 'a.rule', 'a.opened_at');
    expect(alerts.length).toBeGreaterThan(0);
    for (const a of alerts) {
      const opened = new Date(a.opened_at).getTime();
      expect(opened).toBeGreaterThanOrEqual(downAt - 1000);
      expect(opened).toBeLessThan(upAt);
    }
    const events = await knex('alert_events').whereIn('alert_id', alerts.map((a) => a.id)).where({ kind: 'opened' }).count<{ count: string }[]>('* as count');
    expect(Number(events[0].count)).toBe(alerts.length);

    console.log(
      `[faults] PostgreSQL down ${Math.round((upAt - downAt) / 1000)} s: 503 in ${outage.length}/${outage.length} readings; ` +
        `write queue peak ${maxQueue} (bound ${BOUND}); ${held} messages held, ${unackedPeak} messages (${unackedPeak * 5} samples) unacknowledged at the units; RSS ${Math.round(baselineRss)} → peak ${Math.round(maxRss)} MB; ` +
        `healthy ${healthyAfterMs} ms after the start; ${result.ackedCount} samples acknowledged and stored once; ` +
        `alerts raised during the outage: ${alerts.map((a) => a.rule).join(', ')}`,
    );
  });
});
