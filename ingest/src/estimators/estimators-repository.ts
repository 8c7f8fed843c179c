import type { Knex } from 'knex';
import { escapeLike } from '../auth/users-repository';

export interface SeriesBucket {
  b: number;
  count: number;
  nis_min: number;
  nis_max: number;
  nis_mean: number;
  cusum_up: number;
  cusum_down: number;
}

function toBucket(r: Record<string, unknown>): SeriesBucket {
  return {
    b: Number(r.b),
    count: Number(r.count),
    nis_min: Number(r.nis_min),
    nis_max: Number(r.nis_max),
    nis_mean: Number(r.nis_mean),
    cusum_up: Number(r.cusum_up),
    cusum_down: Number(r.cusum_down),
  };
}

export class EstimatorsRepository {
  constructor(private readonly knex: Knex) {}

  detailRow(id: number) {
    return this.knex('estimators as e')
      .join('units as u', 'u.id', 'e.unit_id')
      .join('sites as s', 's.id', 'u.site_id')
      .join('design_revisions as r', 'r.id', 'e.design_revision_id')
      .join('designs as d', 'd.id', 'r.design_id')
      .leftJoin('estimator_status as st', 'st.estimator_id', 'e.id')
      .where('e.id', id)
      .first(
        'e.id',
        'e.key',
        'e.expected_interval_ms',
        'u.key as unit_key',
        'u.name as unit_name',
        's.key as site_key',
        's.name as site_name',
        'd.key as design_key',
        'd.name as design_name',
        'r.id as revision_id',
        'r.revision',
        'r.status as revision_status',
        'e.measurement_dim',
        'st.verdict',
        'st.verdict_since',
        'st.last_received_at',
        'st.samples_total',
        'st.window',
        this.knex.raw(`(select count(*)::int from alerts a where a.estimator_id = e.id and a.state <> 'resolved') as live`),
        this.knex.raw(
          `(select max(case a.severity when 'critical' then 3 when 'warning' then 2 else 1 end) from alerts a where a.estimator_id = e.id and a.state <> 'resolved') as worst`,
        ),
      );
  }

  /** The range aggregated into buckets of bucketMs, extremes kept. */
  async buckets(id: number, fromMs: number, toMs: number, bucketMs: number): Promise<SeriesBucket[]> {
    const rows = await this.knex('innovation_samples')
      .where('estimator_id', id)
      .where('t', '>=', new Date(fromMs))
      .where('t', '<', new Date(toMs))
      .groupBy('b')
      .orderBy('b')
      .select(
        this.knex.raw('floor((extract(epoch from t) * 1000 - ?) / ?)::int as b', [fromMs, bucketMs]),
        this.knex.raw('count(*)::int as count'),
        this.knex.raw('min(nis) as nis_min'),
        this.knex.raw('max(nis) as nis_max'),
        this.knex.raw('avg(nis) as nis_mean'),
        this.knex.raw('max(cusum_up) as cusum_up'),
        this.knex.raw('max(cusum_down) as cusum_down'),
      );
    return rows.map(toBucket);
  }

  /** The same from the minute rollups, for buckets of whole minutes (long ranges). */
  async rollupBuckets(id: number, fromMs: number, toMs: number, bucketMs: number): Promise<SeriesBucket[]> {
    const rows = await this.knex('estimator_rollups_minute')
      .where('estimator_id', id)
      .where('minute', '>=', new Date(fromMs))
      .where('minute', '<', new Date(toMs))
      .groupBy('b')
      .orderBy('b')
      .select(
        this.knex.raw('floor((extract(epoch from minute) * 1000 - ?) / ?)::int as b', [fromMs, bucketMs]),
        this.knex.raw('sum(samples)::int as count'),
        this.knex.raw('min(nis_min) as nis_min'),
        this.knex.raw('max(nis_max) as nis_max'),
        this.knex.raw('sum(nis_sum) / nullif(sum(samples), 0) as nis_mean'),
        this.knex.raw('max(cusum_up_max) as cusum_up'),
        this.knex.raw('max(cusum_down_max) as cusum_down'),
      );
    return rows.map(toBucket);
  }

  /** The whitened innovations of the latest `limit` samples in the range, oldest first. */
  async whitened(id: number, fromMs: number, toMs: number, limit: number): Promise<Buffer[]> {
    const rows = await this.knex('innovation_samples')
      .where('estimator_id', id)
      .where('t', '>=', new Date(fromMs))
      .where('t', '<', new Date(toMs))
      .orderBy('t', 'desc')
      .limit(limit)
      .select('w');
    return rows.map((r) => r.w as Buffer).reverse();
  }

  async list(q: { unit?: string; site?: string; q?: string; limit: number; offset: number }) {
    const base = this.knex('estimators as e')
      .join('units as u', 'u.id', 'e.unit_id')
      .join('sites as s', 's.id', 'u.site_id')
      .join('design_revisions as r', 'r.id', 'e.design_revision_id')
      .join('designs as d', 'd.id', 'r.design_id');
    if (q.unit) base.where('u.key', q.unit);
    if (q.site) base.where('s.key', q.site);
    if (q.q) {
      const like = `%${escapeLike(q.q)}%`;
      base.where((w) => w.whereILike('u.key', like).orWhereILike('e.key', like));
    }
    const [{ count }] = await base.clone().count<{ count: string }[]>('* as count');
    const rows = await base
      .orderBy('u.key')
      .orderBy('e.key')
      .limit(q.limit)
      .offset(q.offset)
      .select('e.id', 'e.key', 'u.key as unitKey', 's.key as siteKey', 'd.key as designKey', 'r.revision', 'e.measurement_dim as measurementDim', 'e.expected_interval_ms as expectedIntervalMs');
    return { total: Number(count), items: rows.map((r) => ({ ...r, id: Number(r.id), revision: Number(r.revision) })) };
  }
}
