import { HttpParams } from '@angular/common/http';
import type { EstimatorVerdict } from '../../../../shared/src/api/api-types';

/** The columns GET /api/fleet sorts by. */
export type FleetSort = 'verdict' | 'unit' | 'estimator' | 'site' | 'design' | 'lastSampleAt' | 'nisRatio' | 'openAlerts';

/** What the fleet table shows: filters, sort and page. */
export interface FleetQuery {
  site: string;
  design: string;
  verdict: EstimatorVerdict | '';
  q: string;
  sort: FleetSort;
  order: 'asc' | 'desc';
  pageIndex: number;
  pageSize: number;
}

export const DEFAULT_FLEET_QUERY: FleetQuery = {
  site: '',
  design: '',
  verdict: '',
  q: '',
  sort: 'verdict',
  order: 'desc',
  pageIndex: 0,
  pageSize: 25,
};

/** The query string of GET /api/fleet for a table state; empty filters are left out. */
export function fleetParams(query: FleetQuery): HttpParams {
  let params = new HttpParams()
    .set('sort', query.sort)
    .set('order', query.order)
    .set('limit', query.pageSize)
    .set('offset', query.pageIndex * query.pageSize);
  if (query.site) params = params.set('site', query.site);
  if (query.design) params = params.set('design', query.design);
  if (query.verdict) params = params.set('verdict', query.verdict);
  const q = query.q.trim();
  if (q) params = params.set('q', q);
  return params;
}
