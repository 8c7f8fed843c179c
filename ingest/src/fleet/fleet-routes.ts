import { z } from 'zod';
import type { FleetHeatmap, FleetResponse } from '../../../shared/src/api/api-types';
import { fleetDiscoveries } from '../../../shared/src/index';
import type { Clock } from '../clock';
import { paging, route, text, type RouteDef } from '../http/route-table';
import { SharedAnswerCache } from '../http/shared-answer-cache';
import type { FleetRepository } from './fleet-repository';

const verdict = z.enum(['consistent', 'marginal', 'inconsistent', 'silent']);
const fleetQuery = z.object({
  site: text(64).optional(),
  design: text(64).optional(),
  unit: text(64).optional(),
  verdict: verdict.optional(),
  q: text(100).optional(),
  sort: z.enum(['verdict', 'unit', 'estimator', 'site', 'design', 'lastSampleAt', 'nisRatio', 'openAlerts']).default('verdict'),
  ...paging,
  order: z.enum(['asc', 'desc']).default('desc'),
  /** False discovery rate for the fleet-wide screen. */
  fdr: z.coerce.number().gt(0).lt(1).default(0.05),
});

const heatmapQuery = z.object({
  from: z.iso.datetime({ offset: true }).optional(),
  to: z.iso.datetime({ offset: true }).optional(),
  buckets: z.coerce.number().int().min(2).max(240).default(60),
  limit: z.coerce.number().int().min(1).max(2000).default(200),
});

/**
 * `cacheMs`: how long one computed fleet summary serves everyone asking the same question
 * (0: every request computes its own). Many dashboards poll the same summary, and each
 * computation reads every estimator's status.
 */
export function fleetRoutes(fleet: FleetRepository, clock: Clock, cacheMs = 0): RouteDef[] {
  const summaries = new SharedAnswerCache<FleetResponse>(cacheMs, clock);
  return [
    route({
      method: 'get',
      path: '/fleet',
      ability: 'read',
      tag: 'fleet',
      summary: 'Every estimator with its verdict, last-sample age, window statistics and live alerts (paged, sorted, filtered)',
      query: fleetQuery,
      handler: ({ query }): Promise<FleetResponse> => summaries.get(JSON.stringify(query), async () => {
        const now = clock.now();
        const [page, counts, liveAlerts, pValues] = await Promise.all([
          fleet.list(query, now),
          fleet.counts(),
          fleet.liveAlerts(),
          fleet.pValues(),
        ]);
        const discoveries = fleetDiscoveries(
          pValues.map((p) => ({ key: p.id, pValue: p.pValue })),
          query.fdr,
        ).map((d) => d.key);
        return {
          generatedAt: new Date(now).toISOString(),
          total: page.total,
          limit: query.limit,
          offset: query.offset,
          items: page.items,
          counts,
          liveAlerts,
          discoveries: { q: query.fdr, estimatorIds: discoveries },
        };
      }),
    }),
    route({
      method: 'get',
      path: '/fleet/heatmap',
      ability: 'read',
      tag: 'fleet',
      summary: 'Mean NIS / m per estimator and time bucket (1 is consistent), from minute rollups',
      query: heatmapQuery,
      handler: async ({ query }): Promise<FleetHeatmap> => {
        const toMs = query.to ? Date.parse(query.to) : clock.now();
        const fromMs = query.from ? Date.parse(query.from) : toMs - 6 * 3_600_000;
        const bucketMs = Math.max(60_000, Math.ceil((toMs - fromMs) / query.buckets / 60_000) * 60_000);
        const n = Math.ceil((toMs - fromMs) / bucketMs);
        const { rows, estimators } = await fleet.heatmap(fromMs, toMs, bucketMs, query.limit);
        const byEstimator = new Map<number, (number | null)[]>();
        for (const e of estimators) byEstimator.set(Number(e.id), new Array(n).fill(null));
        const dims = new Map(estimators.map((e) => [Number(e.id), Number(e.measurement_dim)]));
        for (const r of rows) {
          const values = byEstimator.get(Number(r.estimator_id));
          const b = Number(r.bucket);
          if (values && b >= 0 && b < n && r.mean_nis !== null) values[b] = Number(r.mean_nis) / (dims.get(Number(r.estimator_id)) ?? 1);
        }
        return {
          from: new Date(fromMs).toISOString(),
          to: new Date(toMs).toISOString(),
          bucketMs,
          times: Array.from({ length: n }, (_, i) => new Date(fromMs + i * bucketMs).toISOString()),
          rows: estimators.map((e) => ({
            estimatorId: Number(e.id),
            label: `${e.unit_key}/${e.key}`,
            verdict: e.verdict ?? 'silent',
            values: byEstimator.get(Number(e.id)) ?? [],
          })),
        };
      },
    }),
  ];
}
