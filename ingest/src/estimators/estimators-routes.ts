import { z } from 'zod';
import type { EstimatorDetail, EstimatorSeries } from '../../../shared/src/api/api-types';
import type { Clock } from '../clock';
import { toFleetEstimator } from '../fleet/fleet-repository';
import { HttpProblem } from '../http/problem';
import { idParam, paging, route, text, type RouteDef } from '../http/route-table';
import type { EstimatorsRepository } from './estimators-repository';
import type { SeriesService } from './series-service';

const seriesQuery = z.object({
  from: z.iso.datetime({ offset: true }).optional(),
  to: z.iso.datetime({ offset: true }).optional(),
  points: z.coerce.number().int().min(10).max(2000).default(1000),
});

export interface ChecksSettings {
  windowLength: number;
  alpha: number;
  alphaMarginal: number;
  lags: number;
}

export function estimatorsRoutes(repo: EstimatorsRepository, series: SeriesService, clock: Clock, checks: ChecksSettings): RouteDef[] {
  const detail = async (id: number): Promise<EstimatorDetail> => {
    const r = await repo.detailRow(id);
    if (!r) throw new HttpProblem(404, 'not-found', 'No such estimator', `There is no estimator ${id}.`);
    return {
      ...toFleetEstimator(r, clock.now()),
      expectedIntervalMs: Number(r.expected_interval_ms),
      design: {
        id: Number(r.revision_id),
        designKey: r.design_key,
        designName: r.design_name,
        revision: Number(r.revision),
        status: r.revision_status,
      },
      checks,
    };
  };
  return [
    route({
      method: 'get',
      path: '/estimators',
      ability: 'read',
      tag: 'estimators',
      summary: 'Estimators with their unit, site and design revision',
      query: z.object({ unit: text(64).optional(), site: text(64).optional(), q: text(100).optional(), limit: paging.limit, offset: paging.offset }),
      handler: async ({ query }) => ({ ...(await repo.list(query)), limit: query.limit, offset: query.offset }),
    }),
    route({
      method: 'get',
      path: '/estimators/:id',
      ability: 'read',
      tag: 'estimators',
      summary: 'One estimator: verdict, reasons, window statistics, design revision, the checks\' settings',
      params: idParam,
      handler: ({ params }) => detail(params.id),
    }),
    route({
      method: 'get',
      path: '/estimators/:id/series',
      ability: 'read',
      tag: 'estimators',
      summary: 'NIS and CUSUM over a time range, down-sampled to at most `points` buckets (extremes kept); histogram, autocorrelation and bias of the whitened innovations of the latest 8,000 samples in the range',
      params: idParam,
      query: seriesQuery,
      handler: async ({ params, query }): Promise<EstimatorSeries> => {
        const d = await detail(params.id);
        const toMs = query.to ? Date.parse(query.to) : clock.now();
        const fromMs = query.from ? Date.parse(query.from) : toMs - 3_600_000;
        if (!(fromMs < toMs)) throw new HttpProblem(400, 'invalid-request', 'Invalid request', 'query from: must be before to.');
        if (toMs - fromMs > 31 * 86_400_000) throw new HttpProblem(400, 'invalid-request', 'Invalid request', 'query: a range of at most 31 days.');
        return series.series(params.id, d.measurementDim, fromMs, toMs, query.points);
      },
    }),
  ];
}
