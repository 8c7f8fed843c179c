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
  /**
   * Samples waiting to be committed, and the bound past which the broker holds
   * messages instead of taking them. A held message is neither refused nor acknowledged:
   * aedes reads no further from that unit's socket until its messages are done, so TCP
   * flow control holds the unit's client back and its unacknowledged messages stay with
   * the unit. Held messages are taken in arrival order once the backlog (plus the
   * messages being taken, a sample each at least) is below three quarters of the bound.
   */
  backlog?: () => number;
  maxBacklog?: number;
  /** Counts refusals by reason (metrics). */
  onRefused?: (reason: string) => void;
  /** Counts messages held back while the write queue is full (metrics). */
  onHeld?: () => void;
  /** Time from a message's arrival to its commit (or quarantine), in seconds (metrics). */
  onTaken?: (seconds: number) => void;
}

export interface EmbeddedBroker {
  readonly aedes: AedesBroker;
  readonly port: number;
  isUp(): boolean;
  stats(): { clients: number; messagesReceived: number; held: number };
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
  // Back-pressure: messages being taken (parsed, checked, waiting for their commit) and
  // messages held in arrival order until there is room.
  let taking = 0;
  const held: (() => void)[] = [];
  const maxBacklog = options.maxBacklog ?? Number.POSITIVE_INFINITY;
  const load = () => (options.backlog?.() ?? 0) + taking;
  const pump = () => {
    while (held.length > 0 && load() < maxBacklog * 0.75) held.shift()!();
  };

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
      messagesReceived += 1;
      const handle = options.handle;
      if (!handle) return done(null);
      const payload = Buffer.isBuffer(packet.payload) ? packet.payload : Buffer.from(packet.payload);
      const arrived = performance.now();
      const take = () => {
        taking += 1;
        handle(topic.unit, topic.estimator, packet.topic, payload)
          .then(
            () => {
              options.onTaken?.((performance.now() - arrived) / 1000);
              done(null);
            },
            (err: Error) => {
              logger.error({ err: err.message, topic: packet.topic }, 'message could not be taken');
              done(err);
            },
          )
          .finally(() => {
            taking -= 1;
            pump();
          });
      };
      if (held.length === 0 && load() < maxBacklog) return take();
      options.onHeld?.();
      held.push(take);
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
    stats: () => ({ clients: aedes.connectedClients, messagesReceived, held: held.length }),
    close: () =>
      new Promise<void>((resolve) => {
        server.close(() => undefined);
        aedes.close(() => resolve());
      }),
  };
}
