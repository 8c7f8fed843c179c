// The MQTT broker embedded in the service (aedes). Units sign in with their own
// credentials; a unit may publish only under its own topics and subscribe only to its
// own command topic; anonymous connections are refused.
import net from 'node:net';
import tls from 'node:tls';
import type { Knex } from 'knex';
import type { Logger } from '../logger';
import { authenticateDevice } from './device-auth';
import { commandsTopic, parseInnovationsTopic } from './topics';

import type { Aedes as AedesBroker, AuthenticateError, Client } from 'aedes';

export interface BrokerOptions {
  host: string;
  port: number;
  /** PEM certificate and key: listen with MQTT over TLS. */
  tls?: { cert: Buffer; key: Buffer } | null;
  knex: Knex;
  logger: Logger;
  /**
   * Takes every innovations message a unit may publish. The broker acknowledges a
   * QoS 1 message (PUBACK) only when the returned promise resolves: the pipeline
   * resolves it once the message's samples, or its quarantine record, are committed.
   */
  handle?: (unit: string, estimator: string, topic: string, payload: Buffer) => Promise<void>;
  /** True when the service should stop taking messages (its write queue is full). */
  overloaded?: () => boolean;
  /** Counts refusals by reason (metrics). */
  onRefused?: (reason: string) => void;
}

export interface EmbeddedBroker {
  readonly aedes: AedesBroker;
  readonly port: number;
  isUp(): boolean;
  stats(): { clients: number; messagesReceived: number };
  close(): Promise<void>;
}

/** MQTT CONNACK return codes (MQTT 3.1.1, section 3.2.2.3). */
const BAD_USERNAME_OR_PASSWORD = 4;
const NOT_AUTHORIZED = 5;

function refusal(message: string, returnCode: number): AuthenticateError {
  return Object.assign(new Error(message), { returnCode }) as AuthenticateError;
}

export async function startBroker(options: BrokerOptions): Promise<EmbeddedBroker> {
  const { knex, logger } = options;
  const { Aedes } = await import('aedes');
  const unitOf = new WeakMap<Client, string>();
  let messagesReceived = 0;

  const aedes = await Aedes.createBroker({
    authenticate(client, username, password, done) {
      if (!username || !password) {
        done(refusal('anonymous connections are refused', NOT_AUTHORIZED), false);
        return;
      }
      authenticateDevice(knex, username, password.toString('utf8')).then(
        (unit) => {
          if (!unit) {
            logger.warn({ username, clientId: client.id }, 'device sign-in refused');
            done(refusal('bad username or password', BAD_USERNAME_OR_PASSWORD), false);
            return;
          }
          unitOf.set(client, unit);
          done(null, true);
        },
        (err: Error) => {
          logger.error({ err }, 'device sign-in could not be checked');
          done(refusal('server unavailable', 3), false);
        },
      );
    },
    authorizePublish(client, packet, done) {
      if (!client) return done(null);
      const unit = unitOf.get(client);
      const topic = parseInnovationsTopic(packet.topic);
      if (!unit || !topic || topic.unit !== unit) {
        logger.warn({ unit, topic: packet.topic }, 'publish refused: not this unit\'s topic');
        options.onRefused?.('foreign_topic');
        return done(new Error('not authorized to publish on this topic'));
      }
      if (options.overloaded?.()) {
        // No PUBACK: the connection closes and the unit's client keeps the message to resend.
        options.onRefused?.('backpressure');
        return done(new Error('service busy: write queue full'));
      }
      messagesReceived += 1;
      if (!options.handle) return done(null);
      const payload = Buffer.isBuffer(packet.payload) ? packet.payload : Buffer.from(packet.payload);
      options.handle(topic.unit, topic.estimator, packet.topic, payload).then(
        () => done(null),
        (err: Error) => {
          logger.error({ err: err.message, topic: packet.topic }, 'message could not be taken');
          done(err);
        },
      );
    },
    authorizeSubscribe(client, subscription, done) {
      const unit = client ? unitOf.get(client) : undefined;
      if (!client) return done(null, subscription);
      if (!unit || subscription.topic !== commandsTopic(unit)) {
        logger.warn({ unit, topic: subscription.topic }, 'subscribe refused');
        return done(null, null);
      }
      done(null, subscription);
    },
  });

  const server = options.tls ? tls.createServer({ cert: options.tls.cert, key: options.tls.key }, aedes.handle) : net.createServer(aedes.handle);
  await new Promise<void>((resolve, reject) => {
    server.once('error', reject);
    server.listen(options.port, options.host, () => {
      server.off('error', reject);
      resolve();
    });
  });
  const address = server.address();
  const port = typeof address === 'object' && address ? address.port : options.port;
  logger.info({ host: options.host, port, tls: Boolean(options.tls) }, 'MQTT broker listening');

  return {
    aedes,
    port,
    isUp: () => server.listening && !aedes.closed,
    stats: () => ({ clients: aedes.connectedClients, messagesReceived }),
    close: () =>
      new Promise<void>((resolve) => {
        server.close(() => undefined);
        aedes.close(() => resolve());
      }),
  };
}
