// Taking innovations from an external MQTT broker instead of the embedded one (larger
// fleets: a clustered broker in front, see docs and README). The service signs in as
// one client with a persistent session (clean: false, fixed client id) and subscribes
// with QoS 1; each message is acknowledged only after the pipeline has committed it
// (mqtt.js `customHandleAcks`), so the broker keeps and redelivers anything not yet
// stored. Unit authentication and topic permissions are then the broker's job (its ACLs
// must allow a unit to publish only under whitecap/v1/units/{its own key}/).
//
// mqtt.js handles a connection's messages one after another, and MQTT requires PUBACKs
// in order, so one connection takes one message per commit; units that send the batch
// form keep the sample rate high.
import mqtt, { type MqttClient } from 'mqtt';
import type { Logger } from '../logger';
import { parseInnovationsTopic } from './topics';

export interface ExternalSubscriberOptions {
  url: string;
  username?: string;
  password?: string;
  clientId: string;
  logger: Logger;
  handle: (unit: string, estimator: string, topic: string, payload: Buffer) => Promise<void>;
  /** Topic filter subscribed to (default: every unit's innovations). */
  filter?: string;
}

export interface ExternalSubscriber {
  isUp(): boolean;
  stats(): { clients: number; messagesReceived: number };
  close(): Promise<void>;
}

export function startExternalSubscriber(options: ExternalSubscriberOptions): ExternalSubscriber {
  const { logger } = options;
  const filter = options.filter ?? 'whitecap/v1/units/+/estimators/+/innovations';
  let received = 0;
  let client: MqttClient | null = null;
  client = mqtt.connect(options.url, {
    clientId: options.clientId,
    clean: false,
    username: options.username,
    password: options.password,
    reconnectPeriod: 1000,
    connectTimeout: 10_000,
    customHandleAcks: (topic, message, _packet, done) => {
      received += 1;
      const t = parseInnovationsTopic(topic);
      if (!t) {
        done(0);
        return;
      }
      options.handle(t.unit, t.estimator, topic, Buffer.from(message)).then(
        () => done(0),
        (err: Error) => {
          // No PUBACK: the broker redelivers after the next reconnect.
          logger.error({ err: err.message, topic }, 'message from the external broker could not be stored');
          client?.stream.destroy();
        },
      );
    },
  });
  client.on('connect', (connack) => {
    logger.info({ url: options.url, sessionPresent: connack.sessionPresent }, 'connected to the external MQTT broker');
    // Subscribe on every connect: a broker restarted without persistence has forgotten us.
    client?.subscribe(filter, { qos: 1 }, (err) => {
      if (err) logger.error({ err: err.message }, 'subscription to the external broker failed');
    });
  });
  client.on('reconnect', () => logger.warn({ url: options.url }, 'reconnecting to the external MQTT broker'));
  client.on('error', (err) => logger.warn({ err: err.message }, 'external MQTT broker error'));
  return {
    isUp: () => client?.connected ?? false,
    stats: () => ({ clients: client?.connected ? 1 : 0, messagesReceived: received }),
    close: () => new Promise<void>((resolve) => (client ? client.end(false, {}, () => resolve()) : resolve())),
  };
}
