// The HTTP side: the API under /api (routers per resource, built from the route table),
// its OpenAPI document and interactive page, /metrics, and the built dashboard.
import fs from 'node:fs';
import path from 'node:path';
import cookieParser from 'cookie-parser';
import express, { type Express } from 'express';
import helmet from 'helmet';
import { absolutePath as swaggerUiDir } from 'swagger-ui-dist';
import { authRouter, requireSignedIn, type AuthRouterOptions } from '../auth/auth-router';
import type { AuthService } from '../auth/auth-service';
import type { PassportInstance } from '../auth/passport-setup';
import { healthRouter } from '../health/health-router';
import type { HealthService } from '../health/health-service';
import type { Logger } from '../logger';
import type { Metrics } from '../metrics';
import { openApiDocument } from './openapi';
import { HttpProblem, notFound, problemHandler, refusePrototypeKeys } from './problem';
import { mountRoutes, type RouteDef } from './route-table';

export interface AppDeps {
  logger: Logger;
  health: HealthService;
  auth: AuthService;
  passport: PassportInstance;
  authOptions: AuthRouterOptions;
  metrics: Metrics;
  /** Every API route behind sign-in, from the resource modules. */
  routes: RouteDef[];
  publicUrl: string;
  dashboardDir: string;
  /** Routers under /api that need no sign-in (each does its own checking). */
  publicRouters?: { path: string; router: express.Router }[];
}

const DOCS_INIT = `window.onload = function () {
  window.ui = SwaggerUIBundle({ url: '/api/openapi.json', dom_id: '#docs', deepLinking: true, persistAuthorization: false });
};`;

export function createApp(deps: AppDeps): Express {
  const app = express();
  app.disable('x-powered-by');
  app.set('trust proxy', false);
  // Security headers; the dashboard and the API docs load nothing from other origins.
  // (No CORS headers are ever sent: cross-origin calls from browsers are refused.)
  app.use(
    helmet({
      contentSecurityPolicy: {
        directives: {
          defaultSrc: ["'self'"],
          scriptSrc: ["'self'"],
          styleSrc: ["'self'", "'unsafe-inline'"],
          imgSrc: ["'self'", 'data:'],
          fontSrc: ["'self'"],
          connectSrc: ["'self'"],
          objectSrc: ["'none'"],
          frameAncestors: ["'none'"],
          upgradeInsecureRequests: null,
        },
      },
    }),
  );
  // JSON bodies up to 1 MB, with __proto__ and constructor.prototype refused while parsing.
  app.use(express.json({ limit: '1mb', reviver: refusePrototypeKeys }));
  app.use(cookieParser());
  app.use(deps.passport.initialize());

  // Prometheus text format. Served on the HTTP listener, which is loopback by default.
  app.get('/metrics', async (_req, res) => {
    res.type(deps.metrics.registry.contentType).send(await deps.metrics.registry.metrics());
  });

  const api = express.Router();
  api.use('/health', healthRouter(deps.health));
  api.use('/auth', authRouter(deps.auth, deps.passport, { publicUrl: deps.publicUrl, ...deps.authOptions }));
  const document = openApiDocument(deps.routes, deps.publicUrl);
  api.get('/openapi.json', (_req, res) => {
    res.json(document);
  });
  api.get('/docs', (_req, res) => {
    res.type('html').send(
      `<!doctype html><html lang="en"><head><meta charset="utf-8"><title>Whitecap API</title>` +
        `<link rel="stylesheet" href="/api/docs/swagger-ui.css"></head><body><div id="docs"></div>` +
        `<script src="/api/docs/swagger-ui-bundle.js"></script><script src="/api/docs/whitecap-init.js"></script></body></html>`,
    );
  });
  api.get('/docs/whitecap-init.js', (_req, res) => {
    res.type('application/javascript').send(DOCS_INIT);
  });
  api.use('/docs', express.static(swaggerUiDir(), { index: false }));
  for (const p of deps.publicRouters ?? []) api.use(p.path, p.router);
  const resources = express.Router();
  mountRoutes(resources, deps.routes, requireSignedIn(deps.passport));
  api.use(resources);
  api.use(notFound);
  app.use('/api', api);

  const dir = path.resolve(deps.dashboardDir);
  const index = path.join(dir, 'index.html');
  if (fs.existsSync(index)) {
    app.use(express.static(dir, { index: false, maxAge: '1h' }));
    // Client-side routes of the dashboard all answer with its index page.
    app.get('/{*path}', (req, res, next) => {
      if (req.path.includes('..')) return next(new HttpProblem(400, 'invalid-request', 'Invalid path'));
      res.set('Cache-Control', 'no-cache').sendFile(index);
    });
  } else {
    deps.logger.warn({ dir }, 'dashboard not built; only the API is served (run npm run build:dashboard)');
  }
  app.use(notFound);
  app.use(problemHandler(deps.logger));
  return app;
}
