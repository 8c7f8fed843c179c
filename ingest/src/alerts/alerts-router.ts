import { Router } from 'express';
import { z } from 'zod';
import { HttpProblem } from '../http/problem';
import type { AlertsRepository } from './alerts-repository';

const listQuery = z.object({
  state: z.enum(['open', 'acknowledged', 'resolved', 'live']).optional(),
  rule: z.string().max(64).optional(),
  estimatorId: z.coerce.number().int().positive().optional(),
  limit: z.coerce.number().int().min(1).max(500).default(50),
  offset: z.coerce.number().int().min(0).default(0),
});

/** GET /api/alerts: alerts, newest first, filtered by state, rule and estimator, paged. */
export function alertsRouter(alerts: AlertsRepository): Router {
  const router = Router();
  router.get('/', async (req, res) => {
    const parsed = listQuery.safeParse(req.query);
    if (!parsed.success) {
      const issue = parsed.error.issues[0];
      throw new HttpProblem(400, 'invalid-query', 'Invalid query', `${issue.path.join('.')}: ${issue.message}`);
    }
    res.json(await alerts.list(parsed.data));
  });
  return router;
}
