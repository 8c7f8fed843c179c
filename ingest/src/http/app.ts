// The HTTP side: the API under /api and the built dashboard for everything else.
import fs from 'node:fs';
import path from 'node:path';
import express, { type Express } from 'express';
import { alertsRouter } from '../alerts/alerts-router';
import type { AlertsRepository } from '../alerts/alerts-repository';
import { authRouter, requireSignedIn } from '../auth/auth-router';
import type { AuthService } from '../auth/auth-service';
import type { createPassport } from '../auth/passport-setup';
import type { Logger } from '../logger';
import type { Metrics } from '../metrics';
import { healthRouter } from '../health/health-router';
import type { HealthService } from '../health/health-service';
import { notFound, problemHandler } from './problem';

export interface AppDeps {
  logger: Logger;
  health: HealthService;
  auth: AuthService;
  passport: ReturnType<typeof createPassport>;
  metrics: Metrics;
  alerts: AlertsRepository;
  dashboardDir: string;
}

export function createApp(deps: AppDeps): Express {
  const app = express();
  app.disable('x-powered-by');
  app.use(express.json({ limit: '1mb' }));
  app.use(deps.passport.initialize());

  // Prometheus text format. Served on the HTTP listener, which is loopback by default.
  app.get('/metrics', async (_req, res) => {
    res.type(deps.metrics.registry.contentType).send(await deps.metrics.registry.metrics());
  });

  const api = express.Router();
  api.use('/health', healthRouter(deps.health));
  api.use('/auth', authRouter(deps.auth, deps.passport));
  api.use('/alerts', requireSignedIn(deps.passport), alertsRouter(deps.alerts));
  api.use(notFound);
  app.use('/api', api);

  const dir = path.resolve(deps.dashboardDir);
  const index = path.join(dir, 'index.html');
  if (fs.existsSync(index)) {
    app.use(express.static(dir, { index: false, maxAge: '1h' }));
    // Client-side routes of the dashboard all answer with its index page.
    app.get('/{*path}', (_req, res) => {
      res.set('Cache-Control', 'no-cache').sendFile(index);
    });
  } else {
    deps.logger.warn({ dir }, 'dashboard not built; only the API is served (run npm run build:dashboard)');
  }
  app.use(notFound);
  app.use(problemHandler(deps.logger));
  return app;
}
