// A subscriber to the external broker that finds hundreds of messages queued in its
// session (after an outage, or a partition taken over) works through them one commit
// each. mqtt.js processes a connection's packets in order, so a PINGRESP waits behind
// every message before it; it used to arrive after mqtt.js's keepalive deadline, and
// mqtt.js dropped the healthy connection ("Keepalive timeout"), which made the broker
// redeliver what was in flight. Messages from the broker now count as signs of life.
// Debian's mosquitto on loopback; a keepalive of 1 s and 25 ms per message (a slow
// commit) make the backlog of 300 messages take 7.5 s, several keepalive periods.
import mqtt from 'mqtt';
import pino from 'pino';
import { startExternalSubscriber, type ExternalSubscriber } from '../../ingest/src/broker/external-subscriber';
import { Mosquitto } from '../support/mosquitto';
import { sleep, waitFor } from '../support/watch';

jest.setTimeout(60_000);

const TOPIC = 'whitecap/v1/units/keepalive-unit/estimators/position/innovations';
const MESSAGES = 300;

describe('faults: a backlog in the external broker and the MQTT keepalive', () => {
  let broker: Mosquitto;
  let subscriber: ExternalSubscriber | null = null;

  beforeAll(async () => {
    broker = await Mosquitto.start('keepalive');
  });
  afterAll(async () => {
    await subscriber?.destroy();
    await broker?.destroy();
  });

  it('works through 300 queued messages at one commit each without dropping the connection', async () => {
    const warnings: string[] = [];
    const logger = pino({ level: 'warn' }, { write: (line: string) => warnings.push(line) });
    const clientId = `keepalive-${process.pid}`;

    // 1. The session and its subscription, then away: what is published now is queued for it.
    const first = startExternalSubscriber({ url: broker.url, clientId, logger, handle: async () => undefined });
    await waitFor('the subscriber connected', async () => first.isUp(), 10_000, 50);
    await sleep(300); // the SUBSCRIBE acknowledged
    await first.close();

    const unit = await mqtt.connectAsync(broker.url, { clientId: `${clientId}-unit`, clean: true });
    for (let i = 0; i < MESSAGES; i++) await unit.publishAsync(TOPIC, JSON.stringify({ i }), { qos: 1 });
    await unit.endAsync();

    // 2. Back with a 1-s keepalive and 25 ms a message.
    const seen: number[] = [];
    subscriber = startExternalSubscriber({
      url: broker.url,
      clientId,
      logger,
      keepaliveS: 1,
      reconnectMs: 100,
      handle: async (_unit, _estimator, _topic, payload) => {
        seen.push((JSON.parse(payload.toString('utf8')) as { i: number }).i);
        await sleep(25);
      },
    });
    await waitFor(`all ${MESSAGES} messages handled`, async () => new Set(seen).size === MESSAGES, 40_000, 100);
    await subscriber.idle();
    await sleep(2500); // more keepalive periods with nothing queued: pings answered at once

    // Every message once, in order, on one connection, and no keepalive timeout.
    expect(warnings.filter((w) => w.includes('Keepalive timeout'))).toEqual([]);
    expect(warnings.filter((w) => w.includes('reconnecting'))).toEqual([]);
    expect(seen).toEqual(Array.from({ length: MESSAGES }, (_, i) => i));
    expect(subscriber.isUp()).toBe(true);
    expect(subscriber.stats().messagesReceived).toBe(MESSAGES);
  });
});
