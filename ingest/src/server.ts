// Assembles the service: database, broker, HTTP. One process holds all three.
import { randomBytes } from 'node:crypto';
import http from 'node:http';
import { AuthService } from './auth/auth-service';
import { createPassport } from './auth/passport-setup';
import { UsersRepository } from './auth/users-repository';
import type { Knex } from 'knex';
import { startBroker, type EmbeddedBroker } from './broker/broker';
import type { Config } from './config';
import { createKnex } from './db/knex';
import { HealthService } from './health/health-service';
import { createApp } from './http/app';
import type { Logger } from './logger';

export interface RunningService {
  knex: Knex;
  broker: EmbeddedBroker | null;
  httpPort: number;
  stop(): Promise<void>;
}

export async function startService(config: Config, logger: Logger): Promise<RunningService> {
  const knex = createKnex(config.database.url, config.database.poolMax);
  let broker: EmbeddedBroker | null = null;
  if (config.mqtt.enabled) {
    broker = await startBroker({ host: config.mqtt.host, port: config.mqtt.port, knex, logger });
  }
  const health = new HealthService(knex, () => broker, config.healthTimeoutMs);
  const secret = config.auth.jwtSecret ?? randomBytes(32).toString('base64url');
  if (!config.auth.jwtSecret) logger.info('no WHITECAP_JWT_SECRET set: using a random signing key for this run');
  const users = new UsersRepository(knex);
  const auth = new AuthService(users, secret, config.auth.accessTokenTtlSeconds);
  const passport = createPassport(auth, users, secret);
  const app = createApp({ logger, health, auth, passport, dashboardDir: config.dashboardDir });
  const server = http.createServer(app);
  await new Promise<void>((resolve, reject) => {
    server.once('error', reject);
    server.listen(config.http.port, config.http.host, () => {
      server.off('error', reject);
      resolve();
    });
  });
  const address = server.address();
  const httpPort = typeof address === 'object' && address ? address.port : config.http.port;
  logger.info({ url: `http://${config.http.host}:${httpPort}` }, 'HTTP server listening');

  return {
    knex,
    broker,
    httpPort,
    async stop() {
      await new Promise<void>((resolve) => {
        server.close(() => resolve());
        server.closeAllConnections();
      });
      if (broker) await broker.close();
      await knex.destroy();
    },
  };
}
