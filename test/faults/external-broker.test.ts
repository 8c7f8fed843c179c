// The service takes innovations from an external broker (Debian's mosquitto on loopback,
// started here with its own configuration) and the broker restarts mid-stream, twice:
// cleanly (it keeps its sessions and queued messages), then as a broker that lost its
// state (killed, saved state gone). The service reconnects and subscribes again by itself
// each time; what the broker acknowledged before the clean restart and everything
// published once the service is subscribed again is stored, once.
import { randomBytes } from 'node:crypto';
import knexFactory, { type Knex } from 'knex';
import { innovationsTopic } from '../../ingest/src/broker/topics';
import { demoDeviceSecret } from '../../ingest/src/demo/saltmarsh';
import { PlantFilter, batchPayload, plantDesign } from '../../simulators/src/index';
import { createTestDatabase, type TestDatabase } from '../support/database';
import { compareWithStored, demoLoadUnits, FleetLoad, storedSamples } from '../support/fleet-load';
import { Mosquitto } from '../support/mosquitto';
import { connectUnit, endClient, publishAcked } from '../support/mqtt';
import { runCli, startService, type ServiceHandle } from '../support/service';
import { health, sleep, waitFor } from '../support/watch';

jest.setTimeout(150_000);

const PROBE = { unit: 'cabinet-12', estimator: 'charge' };

describe('faults: the external MQTT broker restarts mid-stream', () => {
  let db: TestDatabase;
  let knex: Knex;
  let broker: Mosquitto;
  let service: ServiceHandle | null = null;
  let load: FleetLoad | null = null;
  const probeFilter = new PlantFilter({ design: plantDesign('cabinet-charge'), seed: 3, startTime: Date.now() - 3_600_000, reference: false });
  const probeSeqs: number[] = [];

  /** Publishes one sample on the probe estimator until one is stored: the service is subscribed. */
  const probe = async (timeoutMs = 30_000): Promise<number> => {
    const started = Date.now();
    await waitFor(
      'a probe sample stored',
      async () => {
        const sample = probeFilter.next();
        const unit = await connectUnit(broker.port, PROBE.unit, demoDeviceSecret(PROBE.unit));
        try {
          await publishAcked(unit, innovationsTopic(PROBE.unit, PROBE.estimator), batchPayload([sample]));
        } finally {
          await endClient(unit);
        }
        probeSeqs.push(sample.seq);
        const deadline = Date.now() + 1000;
        while (Date.now() < deadline) {
          const stored = await storedSamples(knex, [PROBE.unit]);
          if (stored.get(`${PROBE.unit}/${PROBE.estimator}`)?.has(sample.seq)) return true;
          await sleep(100);
        }
        return false;
      },
      timeoutMs,
      0,
    );
    return Date.now() - started;
  };

  beforeAll(async () => {
    db = await createTestDatabase('faults_external');
    await runCli('ingest/cli/seed.ts', [], { WHITECAP_DATABASE_URL: db.url });
    knex = knexFactory({ client: 'pg', connection: db.url, pool: { min: 0, max: 2 } });
    broker = await Mosquitto.start('external');
  });
  afterAll(async () => {
    await load?.close();
    await service?.stop('SIGKILL');
    await broker?.destroy();
    await knex?.destroy();
    await db?.drop();
  });

  it('reconnects and subscribes again by itself; what is published after each restart is stored once', async () => {
    service = await startService({
      WHITECAP_DATABASE_URL: db.url,
      WHITECAP_EXTERNAL_MQTT_URL: broker.url,
      WHITECAP_WORKER_ID: `faults-${randomBytes(4).toString('hex')}`,
      WHITECAP_NOTIFICATIONS: 'false',
    });
    await waitFor('the service connected to mosquitto', async () => (await health(service!.url)).body.broker.up, 20_000);
    await probe();

    // Ten tractors, a batch of 20 samples every 200 ms each (1,000 samples/s).
    const units = demoLoadUnits((k) => /^tractor-(0[1-9]|10)$/.test(k));
    load = new FleetLoad({ url: broker.url, units, batchSize: 20, window: 4, intervalMs: 200 });
    await load.connect();
    load.start();
    const storedCount = async () => [...(await storedSamples(knex))].reduce((a, [k, m]) => a + (k.startsWith('tractor-') ? m.size : 0), 0);
    await waitFor('3,000 samples stored', async () => (await storedCount()) >= 3000, 30_000);

    // 1. A clean restart: sessions, subscriptions and queued messages survive it.
    await broker.restart({ downMs: 1000 });
    const cleanRestartAt = Date.now();
    await waitFor('the service back on mosquitto', async () => (await health(service!.url)).body.broker.up, 20_000);
    await waitFor('every unit reconnected', () => load!.connectedUnits() === units.length, 20_000);
    const afterClean = load.ackedSampleCount();
    await waitFor('3,000 more samples acknowledged', () => load!.ackedSampleCount() >= afterClean + 3000, 30_000);
    // Everything the broker acknowledged so far, before and after the restart, gets stored.
    const beforeForget = load.snapshot();
    await waitFor(
      'every sample acknowledged so far stored',
      async () => compareWithStored(beforeForget, await storedSamples(knex)).missing.length === 0,
      30_000,
      250,
    );

    // 2. A broker that lost its state: the service has to subscribe again.
    await broker.restart({ forget: true, downMs: 1000 });
    const forgetRestartAt = Date.now();
    const resubscribedInMs = await probe();
    const afterForget = load.snapshot();
    const fromForget = load.ackedSampleCount();
    await waitFor('3,000 more samples acknowledged', () => load!.ackedSampleCount() >= fromForget + 3000, 30_000);
    load.pause();
    expect(await load.drain(30_000)).toBe(true);
    await load.close();

    const published = load.ackedSince(afterForget);
    await waitFor(
      'every sample published after the second restart stored',
      async () => compareWithStored(published, await storedSamples(knex)).missing.length === 0,
      30_000,
      250,
    );
    const stored = await storedSamples(knex);
    const first = compareWithStored(beforeForget, stored);
    const second = compareWithStored(published, stored);
    expect(first.missing).toEqual([]);
    expect(second.missing).toEqual([]);
    expect(second.ackedCount).toBeGreaterThanOrEqual(3000);
    expect(first.duplicates).toEqual([]);
    expect(compareWithStored(new Map([[`${PROBE.unit}/${PROBE.estimator}`, probeSeqs]]), stored).duplicates).toEqual([]);

    // It reconnected by itself (twice), is up, and mosquitto dropped nothing for it.
    const reconnects = service.output().match(/reconnecting to the external MQTT broker/g) ?? [];
    expect(reconnects.length).toBeGreaterThanOrEqual(2);
    const end = await health(service.url);
    expect(end.status).toBe(200);
    expect(end.body.broker.up).toBe(true);
    expect(broker.droppedMessages()).toEqual([]);

    console.log(
      `[faults] external broker: ${first.ackedCount} samples acknowledged up to the second restart (${Math.round((forgetRestartAt - cleanRestartAt) / 1000)} s after the clean one), all stored; ` +
        `subscribed again ${resubscribedInMs} ms after a restart that lost the broker's state; ${second.ackedCount} samples published after it, all stored; ` +
        `${reconnects.length} reconnections logged`,
    );
  });
});
