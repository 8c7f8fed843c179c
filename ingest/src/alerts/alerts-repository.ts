import type { Knex } from 'knex';

export interface AlertListQuery {
  state?: 'open' | 'acknowledged' | 'resolved' | 'live';
  rule?: string;
  estimatorId?: number;
  limit: number;
  offset: number;
}

export interface AlertListRow {
  id: number;
  rule: string;
  severity: string;
  state: string;
  summary: string;
  openedAt: string;
  lastEvidenceAt: string;
  resolvedAt: string | null;
  estimatorId: number | null;
  estimatorKey: string | null;
  unitKey: string | null;
  siteKey: string | null;
}

export class AlertsRepository {
  constructor(private readonly knex: Knex) {}

  async list(q: AlertListQuery): Promise<{ total: number; items: AlertListRow[] }> {
    const base = this.knex('alerts as a')
      .leftJoin('estimators as e', 'e.id', 'a.estimator_id')
      .leftJoin('units as u', 'u.id', this.knex.raw('coalesce(a.unit_id, e.unit_id)'))
      .leftJoin('sites as s', 's.id', 'u.site_id');
    if (q.state === 'live') base.whereNot('a.state', 'resolved');
    else if (q.state) base.where('a.state', q.state);
    if (q.rule) base.where('a.rule', q.rule);
    if (q.estimatorId !== undefined) base.where('a.estimator_id', q.estimatorId);
    const [{ count }] = await base.clone().count<{ count: string }[]>('* as count');
    const items = await base
      .orderBy('a.opened_at', 'desc')
      .orderBy('a.id', 'desc')
      .limit(q.limit)
      .offset(q.offset)
      .select(
        'a.id',
        'a.rule',
        'a.severity',
        'a.state',
        'a.summary',
        'a.opened_at as openedAt',
        'a.last_evidence_at as lastEvidenceAt',
        'a.resolved_at as resolvedAt',
        'a.estimator_id as estimatorId',
        'e.key as estimatorKey',
        'u.key as unitKey',
        's.key as siteKey',
      );
    return { total: Number(count), items: items.map((r) => ({ ...r, id: Number(r.id) })) };
  }
}
