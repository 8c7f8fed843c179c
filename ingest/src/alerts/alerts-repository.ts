import type { Knex } from 'knex';
import type { AlertDetail, AlertEvent, AlertListItem, AlertSeverity, AlertState } from '../../../shared/src/api/api-types';
import { escapeLike } from '../auth/users-repository';

export interface AlertListQuery {
  state?: AlertState | 'live';
  severity?: AlertSeverity;
  rule?: string;
  site?: string;
  estimatorId?: number;
  q?: string;
  sort: 'openedAt' | 'severity' | 'state' | 'rule' | 'unit';
  order: 'asc' | 'desc';
  limit: number;
  offset: number;
}

const SORTS: Record<AlertListQuery['sort'], string> = {
  openedAt: 'a.opened_at',
  severity: `case a.severity when 'critical' then 3 when 'warning' then 2 else 1 end`,
  state: `array_position(array['open','acknowledged','resolved'], a.state)`,
  rule: 'a.rule',
  unit: 'u.key',
};

const iso = (d: Date | null | undefined) => (d ? new Date(d).toISOString() : null);

export class AlertsRepository {
  constructor(private readonly knex: Knex) {}

  private base() {
    return this.knex('alerts as a')
      .leftJoin('estimators as e', 'e.id', 'a.estimator_id')
      .leftJoin('units as u', 'u.id', this.knex.raw('coalesce(a.unit_id, e.unit_id)'))
      .leftJoin('sites as s', 's.id', 'u.site_id')
      .leftJoin('users as ack', 'ack.id', 'a.acknowledged_by');
  }

  private static columns = [
    'a.id',
    'a.rule',
    'a.severity',
    'a.state',
    'a.summary',
    'a.opened_at',
    'a.last_evidence_at',
    'a.acknowledged_at',
    'ack.display_name as acknowledged_by_name',
    'a.resolved_at',
    'a.estimator_id',
    'e.key as estimator_key',
    'u.key as unit_key',
    's.key as site_key',
  ];

  private static toItem(r: Record<string, any>): AlertListItem {
    return {
      id: Number(r.id),
      rule: r.rule,
      severity: r.severity,
      state: r.state,
      summary: r.summary,
      openedAt: iso(r.opened_at)!,
      lastEvidenceAt: iso(r.last_evidence_at)!,
      acknowledgedAt: iso(r.acknowledged_at),
      acknowledgedBy: r.acknowledged_by_name ?? null,
      resolvedAt: iso(r.resolved_at),
      estimatorId: r.estimator_id === null ? null : Number(r.estimator_id),
      estimatorKey: r.estimator_key ?? null,
      unitKey: r.unit_key ?? null,
      siteKey: r.site_key ?? null,
    };
  }

  async list(q: AlertListQuery): Promise<{ total: number; items: AlertListItem[] }> {
    const base = this.base();
    if (q.state === 'live') base.whereNot('a.state', 'resolved');
    else if (q.state) base.where('a.state', q.state);
    if (q.severity) base.where('a.severity', q.severity);
    if (q.rule) base.where('a.rule', q.rule);
    if (q.site) base.where('s.key', q.site);
    if (q.estimatorId !== undefined) base.where('a.estimator_id', q.estimatorId);
    if (q.q) {
      const like = `%${escapeLike(q.q)}%`;
      base.where((w) => w.whereILike('u.key', like).orWhereILike('e.key', like).orWhereILike('a.summary', like));
    }
    const [{ count }] = await base.clone().count<{ count: string }[]>('* as count');
    const rows = await base
      .orderByRaw(`${SORTS[q.sort]} ${q.order}`)
      .orderBy('a.id', 'desc')
      .limit(q.limit)
      .offset(q.offset)
      .select(AlertsRepository.columns);
    return { total: Number(count), items: rows.map(AlertsRepository.toItem) };
  }

  async detail(id: number): Promise<AlertDetail | null> {
    const row = await this.base().where('a.id', id).first([...AlertsRepository.columns, 'a.evidence']);
    if (!row) return null;
    const events = await this.knex('alert_events as ev')
      .leftJoin('users as us', 'us.id', 'ev.actor_user_id')
      .where('ev.alert_id', id)
      .orderBy('ev.at')
      .orderBy('ev.id')
      .select('ev.id', 'ev.at', 'ev.kind', 'us.display_name as actor', 'ev.note', 'ev.data');
    return {
      ...AlertsRepository.toItem(row),
      evidence: row.evidence ?? {},
      events: events.map(
        (e): AlertEvent => ({ id: Number(e.id), at: iso(e.at)!, kind: e.kind, actor: e.actor ?? null, note: e.note ?? null, data: e.data ?? null }),
      ),
    };
  }

  /** Locks the alert row for a state change; null when there is no such alert. */
  lockState(trx: Knex.Transaction, id: number): Promise<{ id: number; state: AlertState; estimator_id: number | null; rule: string } | undefined> {
    return trx('alerts').where({ id }).forUpdate().first('id', 'state', 'estimator_id', 'rule');
  }

  async setState(trx: Knex.Transaction, id: number, patch: Record<string, unknown>): Promise<void> {
    await trx('alerts').where({ id }).update(patch);
  }

  async addEvent(trx: Knex.Transaction, e: { alertId: number; kind: string; actorUserId: number | null; note?: string | null; data?: unknown }): Promise<void> {
    await trx('alert_events').insert({
      alert_id: e.alertId,
      kind: e.kind,
      actor_user_id: e.actorUserId,
      note: e.note ?? null,
      data: e.data === undefined ? null : JSON.stringify(e.data),
    });
  }
}
