import { Router } from 'express';
import type { HealthService } from './health-service';

/** GET /api/health: 200 when the database and the broker are up and writes go through, 503 otherwise. */
export function healthRouter(health: HealthService): Router {
  const router = Router();
  router.get('/', async (_req, res) => {
    const report = await health.report();
    res.status(report.status === 'ok' ? 200 : 503).set('Cache-Control', 'no-store').json(report);
  });
  return router;
}
