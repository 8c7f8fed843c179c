// The MQTT broker embedded in the service (aedes). Units sign in with their own
// credentials; a unit may publish only under its own topics and subscribe only to its
// own command topic; anonymous connections are refused.
import net from 'node:net';
import tls from 'node:tls';
import type { Knex } from 'knex';
import type { Logger } from '../logger';
import { authenticateDevice } from './device-auth';
import { guardPacketSize } from './packet-size-guard';
import { TokenBuckets } from './unit-rate-limit';
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
  /** A connection that sends a larger MQTT packet (declared in its header) is closed before the packet is read (refused: too_large). */
  maxPacketBytes?: number;
  /** Connection attempts per client id per minute, as a burst of this many refilled evenly; more are refused with CONNACK 3 (refused: connect_rate). */
  connectsPerMinute?: number;
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
const SERVER_UNAVAILABLE = 3;
const BAD_USERNAME_OR_PASSWORD = 4;
const NOT_AUTHORIZED = 5;

function refusal(message: string, returnCode: number): AuthenticateError {
  return Object.assign(new Error(message), { returnCode }) as AuthenticateError;
}

export async function startBroker(options: BrokerOptions): Promise<EmbeddedBroker> {
  const { knex, logger } = options;
  const { Aedes } = await import('aedes');
  const unitOf = new WeakMap<Client, string>();
  const connects = options.connectsPerMinute
    ? new TokenBuckets({ ratePerSecond: options.connectsPerMinute / 60, burst: options.connectsPerMinute })
    : null;
  let connectWarnedAt = 0;
  let messagesReceived = 0;
  // Back-pressure: messages being taken (parsed, checked, waiting for their commit) and
  // messages held in arrival order until there is room.
  let taking = 0;
  const held: (() => void)[] = [];
  const maxBacklog = options.maxBacklog ?? Number.POSITIVE_INFINITY;
  // Counted in samples, known before the message is parsed: held messages released together
  // would otherwise count one each and bring up to a batch of samples each.
  const load = () => Math.max(options.backlog?.() ?? 0, taking);
  const pump = () => {
    while (held.length > 0 && load() < maxBacklog * 0.75) held.shift()!();
  };

  const aedes = await Aedes.createBroker({
    authenticate(client, username, password, done) {
      // Before anything costs a database query: a client reconnecting in a tight loop.
      if (connects && !connects.take(client.id, 1, Date.now())) {
        options.onRefused?.('connect_rate');
        if (Date.now() - connectWarnedAt > 10_000) {
          connectWarnedAt = Date.now();
          logger.warn({ clientId: client.id, username }, 'connection refused: too many connects from this client id');
        }
        done(refusal('server unavailable: too many connects, try later', SERVER_UNAVAILABLE), false);
        return;
      }
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
          done(refusal('server unavailable', SERVER_UNAVAILABLE), false);
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
      const weight = samplesIn(payload);
      const take = () => {
        taking += weight;
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
            taking -= weight;
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

  const maxPacketBytes = options.maxPacketBytes;
  const accept = (socket: net.Socket) => {
    aedes.handle(socket);
    if (maxPacketBytes) {
      guardPacketSize(socket, maxPacketBytes, (declared) => {
        options.onRefused?.('too_large');
        logger.warn({ declared, maxPacketBytes, clientId: (socket as net.Socket & { client?: Client }).client?.id }, 'connection closed: MQTT packet over the size limit');
      });
    }
  };
  const server = options.tls ? tls.createServer({ cert: options.tls.cert, key: options.tls.key }, accept) : net.createServer(accept);
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

/** Samples a message carries, without parsing it: the batch form has one "seq" per sample. */
function samplesIn(payload: Buffer): number {
  let n = 0;
  for (let i = payload.indexOf('"seq"'); i !== -1; i = payload.indexOf('"seq"', i + 5)) n += 1;
  return Math.max(1, n);
}
