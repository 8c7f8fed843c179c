// Taking innovations from an external MQTT broker instead of the embedded one (larger
// fleets: a clustered broker in front, see docs/scaling.md and the README). One subscriber
// is one MQTT connection with a persistent session (clean: false, fixed client id)
// subscribed with QoS 1: the whole fleet's topics for a single service, or one
// partition's topics for a partitioned worker (see partition-claims.ts). Each message is
// acknowledged only after the pipeline has committed it (mqtt.js `handleMessage`), so the
// broker keeps and redelivers anything not yet stored — to whoever opens the session
// next, which for a partition may be another worker. Unit authentication and topic
// permissions are then the broker's job (its ACLs must allow a unit to publish only under
// its own topics).
//
// mqtt.js handles a connection's messages one after another, and MQTT requires PUBACKs
// in order, so one connection takes one message per commit; units that send the batch
// form keep the sample rate high.
//
// Reconnection is ours rather than mqtt.js's: before each attempt `mayReconnect` is asked
// (a partitioned worker checks that it still holds the partition), so a worker that lost
// its claim never takes the session back from the worker that holds it now.
import mqtt, { type MqttClient } from 'mqtt';
import type { Logger } from '../logger';
import { parseInnovationsTopic, type InnovationsTopic } from './topics';

export interface ExternalSubscriberOptions {
  url: string;
  username?: string;
  password?: string;
  clientId: string;
  logger: Logger;
  handle: (unit: string, estimator: string, topic: string, payload: Buffer) => Promise<void>;
  /** Topic filter subscribed to (default: every unit's innovations). */
  filter?: string;
  /** Reads a topic (default: the unpartitioned innovations topic); a topic it refuses is acknowledged and dropped. */
  parse?: (topic: string) => InnovationsTopic | null;
  /** Asked before each reconnection; false (or an error) ends the subscriber and calls onGone. */
  mayReconnect?: () => Promise<boolean>;
  onGone?: () => void;
  /** Wait between reconnection attempts (default 1000 ms). */
  reconnectMs?: number;
  /** MQTT keepalive in seconds (default 60). */
  keepaliveS?: number;
  /** Added to every log line (e.g. the partition). */
  logContext?: Record<string, unknown>;
}

export interface ExternalSubscriber {
  isUp(): boolean;
  stats(): { clients: number; messagesReceived: number };
  /**
   * Stops taking messages, lets the one in hand finish (committed and acknowledged), then
   * disconnects. The broker keeps the session, its subscription and whatever was not
   * acknowledged, for the next connection with this client id.
   */
  close(): Promise<void>;
  /** Drops the connection at once and acknowledges nothing more. */
  destroy(): Promise<void>;
  /** Settles when the message in hand, if any, has been handled (stored or failed). */
  idle(): Promise<void>;
}

const CLOSE_TIMEOUT_MS = 5000;

export function startExternalSubscriber(options: ExternalSubscriberOptions): ExternalSubscriber {
  const { logger } = options;
  const ctx = { url: options.url, ...options.logContext };
  const filter = options.filter ?? 'whitecap/v1/units/+/estimators/+/innovations';
  const parse = options.parse ?? parseInnovationsTopic;
  const reconnectMs = options.reconnectMs ?? 1000;
  let received = 0;
  let state: 'open' | 'closing' | 'closed' = 'open';
  /** Counts connections: an acknowledgement belongs to the connection its message came on. */
  let connection = 0;
  let inHand: Promise<void> | null = null;
  let retry: NodeJS.Timeout | null = null;

  const client: MqttClient = mqtt.connect(options.url, {
    clientId: options.clientId,
    clean: false,
    username: options.username,
    password: options.password,
    reconnectPeriod: 0,
    connectTimeout: 10_000,
    keepalive: options.keepaliveS ?? 60,
  });
  // mqtt.js sends a message's PUBACK when handleMessage calls back, and takes the next
  // message of the connection only then. (Its `customHandleAcks` option is honoured only
  // on MQTT 5 connections; on 3.1.1 it acknowledges on receipt.)
  client.handleMessage = (packet, callback) => {
    // Once closing, a message is neither handled nor acknowledged: the broker keeps it in
    // the session (and mqtt.js reads nothing more from this connection).
    if (state !== 'open') return;
    received += 1;
    // A message from the broker shows the connection is alive. mqtt.js counts only
    // acknowledgements and PINGRESP as signs of life, and a PINGRESP waits in line behind
    // the messages before it, one commit each: with hundreds queued (a backlog after an
    // outage) it comes too late and mqtt.js drops a healthy connection ("Keepalive
    // timeout"; 16 of 16 sessions at once in bench:partitioned at 40,000 samples/s offered).
    client.reschedulePing(true);
    const topic = packet.topic;
    const t = parse(topic);
    if (!t) {
      callback();
      return;
    }
    const on = connection;
    const payload = typeof packet.payload === 'string' ? Buffer.from(packet.payload) : Buffer.from(packet.payload);
    const handled = options.handle(t.unit, t.estimator, topic, payload).then(
      () => {
        if (on === connection && client.connected) callback();
      },
      (err: Error) => {
        // No PUBACK: the broker redelivers after the next reconnect.
        logger.error({ ...ctx, err: err.message, topic }, 'message from the external broker could not be stored');
        if (on === connection) client.stream.destroy();
      },
    );
    const tracked: Promise<void> = handled.finally(() => {
      if (inHand === tracked) inHand = null;
    });
    inHand = tracked;
  };

  const scheduleReconnect = () => {
    if (state !== 'open' || retry) return;
    retry = setTimeout(() => {
      retry = null;
      void (async () => {
        let ok = true;
        if (options.mayReconnect) {
          ok = await options.mayReconnect().catch((err: Error) => {
            logger.warn({ ...ctx, err: err.message }, 'could not tell whether to reconnect to the external MQTT broker');
            return false;
          });
        }
        if (state !== 'open') return;
        if (!ok) {
          logger.warn({ ...ctx }, 'not reconnecting to the external MQTT broker: the session is no longer ours');
          state = 'closed';
          client.end(true);
          options.onGone?.();
          return;
        }
        logger.warn({ ...ctx }, 'reconnecting to the external MQTT broker');
        client.reconnect();
      })();
    }, reconnectMs);
    retry.unref();
  };

  client.on('connect', (connack) => {
    connection += 1;
    logger.info({ ...ctx, clientId: options.clientId, sessionPresent: connack.sessionPresent }, 'connected to the external MQTT broker');
    // Subscribe on every connect: a broker restarted without persistence has forgotten us.
    client.subscribe(filter, { qos: 1 }, (err) => {
      if (err && state === 'open') logger.error({ ...ctx, err: err.message }, 'subscription to the external broker failed');
    });
  });
  client.on('close', scheduleReconnect);
  client.on('error', (err) => logger.warn({ ...ctx, err: err.message }, 'external MQTT broker error'));

  const settle = (p: Promise<void> | null) => (p ? p.catch(() => undefined) : Promise.resolve());
  const end = (force: boolean) =>
    new Promise<void>((resolve) => {
      const t = setTimeout(() => {
        client.end(true);
        resolve();
      }, CLOSE_TIMEOUT_MS);
      client.end(force || !client.connected, {}, () => {
        clearTimeout(t);
        resolve();
      });
    });

  return {
    isUp: () => client.connected,
    stats: () => ({ clients: client.connected ? 1 : 0, messagesReceived: received }),
    idle: () => settle(inHand),
    async close() {
      if (state !== 'open') return;
      state = 'closing';
      if (retry) clearTimeout(retry);
      retry = null;
      // The message in hand is committed and acknowledged before the session is left.
      await settle(inHand);
      await end(false);
      state = 'closed';
    },
    async destroy() {
      if (state === 'closed') return;
      state = 'closed';
      if (retry) clearTimeout(retry);
      retry = null;
      connection += 1; // nothing in hand gets acknowledged any more
      await end(true);
    },
  };
}
