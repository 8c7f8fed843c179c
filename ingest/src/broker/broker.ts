// The MQTT broker embedded in the service (aedes). Units sign in with their own
// credentials; a unit may publish only under its own topics and subscribe only to its
// own command topic; anonymous connections are refused.
import net from 'node:net';
import type { Knex } from 'knex';
import type { Logger } from '../logger';
import { authenticateDevice } from './device-auth';
import { commandsTopic, parseInnovationsTopic } from './topics';

import type { Aedes as AedesBroker, AedesPublishPacket, AuthenticateError, Client } from 'aedes';

export interface BrokerOptions {
  host: string;
  port: number;
  knex: Knex;
  logger: Logger;
  /** Called for every accepted innovations message, after authorization. */
  onInnovations?: (unit: string, estimator: string, payload: Buffer) => void;
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
        return done(new Error('not authorized to publish on this topic'));
      }
      done(null);
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

  aedes.subscribe(
    'whitecap/v1/units/+/estimators/+/innovations',
    (packet: AedesPublishPacket, cb: () => void) => {
      messagesReceived += 1;
      const topic = parseInnovationsTopic(packet.topic);
      if (topic && options.onInnovations) options.onInnovations(topic.unit, topic.estimator, packet.payload as Buffer);
      cb();
    },
    () => undefined,
  );

  const server = net.createServer(aedes.handle);
  await new Promise<void>((resolve, reject) => {
    server.once('error', reject);
    server.listen(options.port, options.host, () => {
      server.off('error', reject);
      resolve();
    });
  });
  const address = server.address();
  const port = typeof address === 'object' && address ? address.port : options.port;
  logger.info({ host: options.host, port }, 'MQTT broker listening');

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
