// The fleet as the overview screens see it: every estimator with its unit, site, design
// revision, current status and live alerts.
import type { Knex } from 'knex';
import type { EstimatorVerdict, FleetEstimator, WindowSummary } from '../../../shared/src/api/api-types';
import { escapeLike } from '../auth/users-repository';

export interface FleetQuery {
  site?: string;
  design?: string;
  verdict?: EstimatorVerdict;
  unit?: string;
  q?: string;
  sort: 'verdict' | 'unit' | 'estimator' | 'site' | 'design' | 'lastSampleAt' | 'nisRatio' | 'openAlerts';
  order: 'asc' | 'desc';
  limit: number;
  offset: number;
}

const SEVERITY_RANK = `case a.severity when 'critical' then 3 when 'warning' then 2 else 1 end`;
// Worst first when sorted descending: inconsistent, silent (stopped publishing), marginal,
// consistent, and last the estimators that have never reported.
const VERDICT_RANK = `case st.verdict when 'inconsistent' then 4 when 'silent' then 3 when 'marginal' then 2 when 'consistent' then 1 else 0 end`;
const SORTS: Record<FleetQuery['sort'], string> = {
  verdict: VERDICT_RANK,
  unit: 'u.key',
  estimator: 'e.key',
  site: 's.key',
  design: 'd.key',
  lastSampleAt: 'st.last_received_at',
  nisRatio: 'st.nis_ratio',
  openAlerts: 'coalesce(al.live, 0)',
};

export class FleetRepository {
  constructor(private readonly knex: Knex) {}

  private base(q: Partial<FleetQuery>) {
    const k = this.knex;
    const live = k('alerts as a')
      .whereNot('a.state', 'resolved')
      .whereNotNull('a.estimator_id')
      .groupBy('a.estimator_id')
      .select('a.estimator_id', k.raw('count(*)::int as live'), k.raw(`max(${SEVERITY_RANK}) as worst`))
      .as('al');
    const b = k('estimators as e')
      .join('units as u', 'u.id', 'e.unit_id')
      .join('sites as s', 's.id', 'u.site_id')
      .join('design_revisions as r', 'r.id', 'e.design_revision_id')
      .join('designs as d', 'd.id', 'r.design_id')
      .leftJoin('estimator_status as st', 'st.estimator_id', 'e.id')
      .leftJoin(live, 'al.estimator_id', 'e.id');
    if (q.site) b.where('s.key', q.site);
    if (q.design) b.where('d.key', q.design);
    if (q.unit) b.where('u.key', q.unit);
    if (q.verdict) b.whereRaw(`coalesce(st.verdict, 'silent') = ?`, [q.verdict]);
    if (q.q) {
      const like = `%${escapeLike(q.q)}%`;
      b.where((w) => w.whereILike('u.key', like).orWhereILike('u.name', like).orWhereILike('e.key', like));
    }
    return b;
  }

  async list(q: FleetQuery, nowMs: number): Promise<{ total: number; items: FleetEstimator[] }> {
    const [{ count }] = await this.base(q).count<{ count: string }[]>('* as count');
    const rows = await this.base(q)
      .orderByRaw(`${SORTS[q.sort]} ${q.order} nulls last`)
      .orderBy('e.id')
      .limit(q.limit)
      .offset(q.offset)
      .select(
        'e.id',
        'e.key',
        'u.key as unit_key',
        'u.name as unit_name',
        's.key as site_key',
        's.name as site_name',
        'd.key as design_key',
        'd.name as design_name',
        'r.revision',
        'e.measurement_dim',
        'st.verdict',
        'st.verdict_since',
        'st.last_received_at',
        'st.samples_total',
        'st.window',
        'al.live',
        'al.worst',
      );
    return { total: Number(count), items: rows.map((r) => toFleetEstimator(r, nowMs)) };
  }

  async counts(): Promise<Record<EstimatorVerdict, number>> {
    const rows = await this.knex('estimators as e')
      .leftJoin('estimator_status as st', 'st.estimator_id', 'e.id')
      .groupByRaw(`coalesce(st.verdict, 'silent')`)
      .select(this.knex.raw(`coalesce(st.verdict, 'silent') as verdict`), this.knex.raw('count(*)::int as n'));
    const out: Record<EstimatorVerdict, number> = { consistent: 0, marginal: 0, inconsistent: 0, silent: 0 };
    for (const r of rows) out[r.verdict as EstimatorVerdict] = Number(r.n);
    return out;
  }

  async liveAlerts(): Promise<Record<'info' | 'warning' | 'critical', number>> {
    const rows = await this.knex('alerts').whereNot('state', 'resolved').groupBy('severity').select('severity', this.knex.raw('count(*)::int as n'));
    const out = { info: 0, warning: 0, critical: 0 };
    for (const r of rows) out[r.severity as keyof typeof out] = Number(r.n);
    return out;
  }

  /** Every estimator's window p-value (for fleet-wide false discovery control). */
  async pValues(): Promise<{ id: number; pValue: number }[]> {
    const rows = await this.knex('estimator_status').whereNotNull('p_value').select('estimator_id', 'p_value');
    return rows.map((r) => ({ id: Number(r.estimator_id), pValue: Number(r.p_value) }));
  }

  /** Mean NIS / m per estimator and time bucket, from the minute rollups. */
  async heatmap(fromMs: number, toMs: number, bucketMs: number, limit: number) {
    const k = this.knex;
    const rows = await k('estimator_rollups_minute as ro')
      .where('ro.minute', '>=', new Date(fromMs))
      .where('ro.minute', '<', new Date(toMs))
      .groupBy('ro.estimator_id', 'bucket')
      .select(
        'ro.estimator_id',
        k.raw(`floor((extract(epoch from ro.minute) * 1000 - ?) / ?)::int as bucket`, [fromMs, bucketMs]),
        k.raw('sum(ro.nis_sum) / nullif(sum(ro.samples), 0) as mean_nis'),
      );
    const estimators = await this.base({})
      .orderByRaw(`${VERDICT_RANK} desc`)
      .orderBy('u.key')
      .orderBy('e.key')
      .limit(limit)
      .select('e.id', 'e.key', 'u.key as unit_key', 'e.measurement_dim', 'st.verdict');
    return { rows, estimators };
  }
}

function toFleetEstimator(r: Record<string, any>, nowMs: number): FleetEstimator {
  const last = r.last_received_at ? new Date(r.last_received_at) : null;
  const worst = Number(r.worst ?? 0);
  return {
    id: Number(r.id),
    key: r.key,
    unitKey: r.unit_key,
    unitName: r.unit_name,
    siteKey: r.site_key,
    siteName: r.site_name,
    designKey: r.design_key,
    designName: r.design_name,
    revision: Number(r.revision),
    measurementDim: Number(r.measurement_dim),
    verdict: (r.verdict ?? 'silent') as EstimatorVerdict,
    verdictSince: r.verdict_since ? new Date(r.verdict_since).toISOString() : null,
    lastSampleAt: last ? last.toISOString() : null,
    lastSampleAgeMs: last ? Math.max(0, nowMs - last.getTime()) : null,
    samplesTotal: Number(r.samples_total ?? 0),
    window: (r.window && Object.keys(r.window).length > 0 ? r.window : null) as WindowSummary | null,
    openAlerts: Number(r.live ?? 0),
    worstOpenSeverity: worst === 3 ? 'critical' : worst === 2 ? 'warning' : worst === 1 ? 'info' : null,
  };
}

export { toFleetEstimator };
