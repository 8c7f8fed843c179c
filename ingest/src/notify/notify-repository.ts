// Knex queries of the notification side: rotas, rules, paging state, acknowledge
// links, webhook endpoints and the delivery outbox.
import type { Knex } from 'knex';
import type { AlertSeverity, Delivery, DeliveryStatus, NotificationRule, RotaInput } from '../../../shared/src/api/api-types';
import type { IsoWeekday, WatchRota } from '../../../shared/src/rota/watch-rota';

const iso = (d: Date | null | undefined) => (d ? new Date(d).toISOString() : null);

export interface AlertFacts {
  id: number;
  rule: string;
  severity: AlertSeverity;
  state: 'open' | 'acknowledged' | 'resolved';
  summary: string;
  evidence: Record<string, unknown>;
  openedAtMs: number;
  unitKey: string | null;
  estimatorKey: string | null;
  siteId: number | null;
  siteName: string | null;
  designRevision: string | null;
}

export interface Person {
  id: number;
  email: string;
  displayName: string;
  role: string;
  active: boolean;
}

export interface NewDelivery {
  channel: 'email' | 'webhook';
  target: string;
  userId?: number | null;
  endpointId?: number | null;
  subject: string;
  content: unknown;
  alertIds: number[];
}

export interface DeliveryRow {
  id: number;
  channel: 'email' | 'webhook';
  target: string;
  endpointId: number | null;
  subject: string;
  content: Record<string, unknown>;
  attempts: number;
}

export interface PagingRow {
  alertId: number;
  rotaId: number | null;
  chain: number[];
  step: number;
  handoffAfterMs: number;
  pagedAtMs: number;
}

function rotaFrom(row: Record<string, any>, overrides: Record<string, any>[]): WatchRota {
  return {
    id: Number(row.id),
    name: row.name,
    scope: row.site_id === null ? { kind: 'fleet' } : { kind: 'site', siteId: Number(row.site_id) },
    timeZone: row.time_zone,
    shifts: (row.shifts as { weekday: number; handover: string; userId: number }[]).map((s) => ({ ...s, weekday: s.weekday as IsoWeekday })),
    backups: row.backups as number[],
    overrides: overrides
      .filter((o) => Number(o.rota_id) === Number(row.id))
      .map((o) => ({
        id: Number(o.id),
        fromMs: new Date(o.from_at).getTime(),
        toMs: new Date(o.to_at).getTime(),
        userId: Number(o.user_id),
        note: o.note ?? undefined,
        createdAtMs: new Date(o.created_at).getTime(),
      })),
  };
}

export type StoredRota = Omit<WatchRota, 'overrides'> & { overrides: (WatchRota['overrides'][number] & { id: number })[] };

export class NotifyRepository {
  constructor(private readonly knex: Knex) {}

  // ------------------------------------------------------------------ rotas

  async rotas(): Promise<StoredRota[]> {
    const rows = await this.knex('watch_rotas').orderByRaw('site_id nulls first').orderBy('id');
    // Overrides that ended more than a week ago are history; the rota screens do not need them.
    const overrides = await this.knex('watch_overrides').where('to_at', '>', this.knex.raw(`now() - interval '7 days'`)).orderBy('from_at');
    return rows.map((r) => rotaFrom(r, overrides) as StoredRota);
  }

  async rota(id: number): Promise<StoredRota | null> {
    const row = await this.knex('watch_rotas').where({ id }).first();
    if (!row) return null;
    const overrides = await this.knex('watch_overrides').where({ rota_id: id }).where('to_at', '>', this.knex.raw(`now() - interval '7 days'`)).orderBy('from_at');
    return rotaFrom(row, overrides) as StoredRota;
  }

  /** The rota that covers a site: the site's own, else the fleet's. */
  async rotaForSite(siteId: number | null): Promise<StoredRota | null> {
    const row = await this.knex('watch_rotas')
      .where((q) => {
        if (siteId !== null) q.where({ site_id: siteId });
        q.orWhereNull('site_id');
      })
      .orderByRaw('site_id nulls last')
      .first();
    return row ? this.rota(Number(row.id)) : null;
  }

  async createRota(input: RotaInput): Promise<number> {
    const [row] = await this.knex('watch_rotas')
      .insert({ name: input.name, site_id: input.siteId, time_zone: input.timeZone, shifts: JSON.stringify(input.shifts), backups: JSON.stringify(input.backups) })
      .returning('id');
    return Number(row.id);
  }

  async updateRota(id: number, input: RotaInput): Promise<boolean> {
    const n = await this.knex('watch_rotas')
      .where({ id })
      .update({
        name: input.name,
        site_id: input.siteId,
        time_zone: input.timeZone,
        shifts: JSON.stringify(input.shifts),
        backups: JSON.stringify(input.backups),
        updated_at: this.knex.fn.now(),
      });
    return n > 0;
  }

  async deleteRota(id: number): Promise<boolean> {
    return (await this.knex('watch_rotas').where({ id }).delete()) > 0;
  }

  async addOverride(rotaId: number, o: { fromMs: number; toMs: number; userId: number; note: string | null; createdBy: number }): Promise<void> {
    await this.knex('watch_overrides').insert({
      rota_id: rotaId,
      user_id: o.userId,
      from_at: new Date(o.fromMs),
      to_at: new Date(o.toMs),
      note: o.note,
      created_by: o.createdBy,
    });
  }

  async deleteOverride(rotaId: number, overrideId: number): Promise<boolean> {
    return (await this.knex('watch_overrides').where({ rota_id: rotaId, id: overrideId }).delete()) > 0;
  }

  // ------------------------------------------------------------------ people

  async people(ids?: number[]): Promise<Map<number, Person>> {
    const q = this.knex('users').select('id', 'email', 'display_name', 'role', 'active');
    if (ids) q.whereIn('id', ids);
    const rows = await q;
    return new Map(rows.map((r) => [Number(r.id), { id: Number(r.id), email: r.email, displayName: r.display_name, role: r.role, active: r.active }]));
  }

  async siteExists(id: number): Promise<{ id: number; name: string } | null> {
    const row = await this.knex('sites').where({ id }).first('id', 'name');
    return row ? { id: Number(row.id), name: row.name } : null;
  }

  async siteNames(): Promise<Map<number, string>> {
    const rows = await this.knex('sites').select('id', 'name');
    return new Map(rows.map((r) => [Number(r.id), r.name as string]));
  }

  // ------------------------------------------------------------------ rules

  async rules(): Promise<NotificationRule[]> {
    const rows = await this.knex('notification_rules').orderByRaw(`array_position(array['critical','warning','info'], severity)`);
    return rows.map((r) => ({
      severity: r.severity,
      pages: r.pages,
      handoffAfterMinutes: r.handoff_after_seconds / 60,
      quietFrom: r.quiet_from,
      quietTo: r.quiet_to,
    }));
  }

  async updateRule(severity: AlertSeverity, change: Partial<Omit<NotificationRule, 'severity'>>): Promise<void> {
    const update: Record<string, unknown> = {};
    if (change.pages !== undefined) update['pages'] = change.pages;
    if (change.handoffAfterMinutes !== undefined) update['handoff_after_seconds'] = Math.round(change.handoffAfterMinutes * 60);
    if (change.quietFrom !== undefined) update['quiet_from'] = change.quietFrom;
    if (change.quietTo !== undefined) update['quiet_to'] = change.quietTo;
    if (Object.keys(update).length > 0) await this.knex('notification_rules').where({ severity }).update(update);
  }

  // ------------------------------------------------------------------ alerts

  async alertFacts(alertId: number): Promise<AlertFacts | null> {
    const r = await this.knex('alerts as a')
      .leftJoin('estimators as e', 'e.id', 'a.estimator_id')
      .leftJoin('units as u', 'u.id', this.knex.raw('coalesce(a.unit_id, e.unit_id)'))
      .leftJoin('sites as s', 's.id', 'u.site_id')
      .leftJoin('design_revisions as r', 'r.id', 'e.design_revision_id')
      .leftJoin('designs as d', 'd.id', 'r.design_id')
      .where('a.id', alertId)
      .first(
        'a.id',
        'a.rule',
        'a.severity',
        'a.state',
        'a.summary',
        'a.evidence',
        'a.opened_at',
        'u.key as unit_key',
        'e.key as estimator_key',
        's.id as site_id',
        's.name as site_name',
        'd.key as design_key',
        'r.revision',
      );
    if (!r) return null;
    return {
      id: Number(r.id),
      rule: r.rule,
      severity: r.severity,
      state: r.state,
      summary: r.summary,
      evidence: r.evidence ?? {},
      openedAtMs: new Date(r.opened_at).getTime(),
      unitKey: r.unit_key ?? null,
      estimatorKey: r.estimator_key ?? null,
      siteId: r.site_id === null || r.site_id === undefined ? null : Number(r.site_id),
      siteName: r.site_name ?? null,
      designRevision: r.design_key ? `${r.design_key} r${r.revision}` : null,
    };
  }

  /** The live alert of an estimator (or unit) and rule: the pipeline's events name those, not the id. */
  async liveAlertId(estimatorId: number | null, unitId: number | null, rule: string): Promise<number | null> {
    const r = await this.knex('alerts')
      .whereRaw('coalesce(estimator_id, 0) = ? and coalesce(unit_id, 0) = ? and rule = ?', [estimatorId ?? 0, unitId ?? 0, rule])
      .orderBy('id', 'desc')
      .first('id');
    return r ? Number(r.id) : null;
  }

  async addAlertEvent(alertId: number, kind: string, note: string | null, data: unknown, actorUserId: number | null = null): Promise<void> {
    await this.knex('alert_events').insert({ alert_id: alertId, kind, note, data: JSON.stringify(data), actor_user_id: actorUserId });
  }

  // ------------------------------------------------------------------ paging

  /** Starts paging an alert; false when it was paged already (one paging per alert). */
  async startPaging(p: { alertId: number; rotaId: number | null; chain: number[]; handoffAfterMs: number; nowMs: number }): Promise<boolean> {
    const rows = await this.knex('alert_paging')
      .insert({
        alert_id: p.alertId,
        rota_id: p.rotaId,
        chain: JSON.stringify(p.chain),
        step: 0,
        handoff_after_ms: p.handoffAfterMs,
        paged_at: new Date(p.nowMs),
        next_handoff_at: new Date(p.nowMs + p.handoffAfterMs),
      })
      .onConflict('alert_id')
      .ignore()
      .returning('alert_id');
    return rows.length > 0;
  }

  /**
   * Takes the alerts whose handoff is due and still open, moving each one step on in the
   * same statement (so two sweeps never hand the same step off twice).
   */
  async takeDueHandoffs(nowMs: number, limit = 100): Promise<(PagingRow & { previousStep: number })[]> {
    const { rows } = await this.knex.raw(
      `with due as (
         select p.alert_id from alert_paging p join alerts a on a.id = p.alert_id
          where p.next_handoff_at <= ? and a.state = 'open'
          order by p.next_handoff_at limit ? for update of p skip locked
       )
       update alert_paging p set
         step = p.step + 1,
         next_handoff_at = case when p.step + 1 >= jsonb_array_length(p.chain) then null
                                else ?::timestamptz + make_interval(secs => p.handoff_after_ms / 1000.0) end
       from due where p.alert_id = due.alert_id
       returning p.alert_id, p.rota_id, p.chain, p.step, p.handoff_after_ms, p.paged_at`,
      [new Date(nowMs), limit, new Date(nowMs)],
    );
    return (rows as any[]).map((r) => ({
      alertId: Number(r.alert_id),
      rotaId: r.rota_id === null ? null : Number(r.rota_id),
      chain: r.chain as number[],
      step: Number(r.step),
      previousStep: Number(r.step) - 1,
      handoffAfterMs: Number(r.handoff_after_ms),
      pagedAtMs: new Date(r.paged_at).getTime(),
    }));
  }

  async stopPaging(alertId: number): Promise<void> {
    await this.knex('alert_paging').where({ alert_id: alertId }).update({ next_handoff_at: null });
  }

  async paging(alertId: number): Promise<PagingRow | null> {
    const r = await this.knex('alert_paging').where({ alert_id: alertId }).first();
    if (!r) return null;
    return {
      alertId: Number(r.alert_id),
      rotaId: r.rota_id === null ? null : Number(r.rota_id),
      chain: r.chain as number[],
      step: Number(r.step),
      handoffAfterMs: Number(r.handoff_after_ms),
      pagedAtMs: new Date(r.paged_at).getTime(),
    };
  }

  // ------------------------------------------------------------------ acknowledge links

  async saveAckLink(l: { nonce: string; alertId: number; userId: number; expiresAtMs: number }): Promise<void> {
    await this.knex('ack_links').insert({ nonce: l.nonce, alert_id: l.alertId, user_id: l.userId, expires_at: new Date(l.expiresAtMs) });
  }

  async ackLink(nonce: string): Promise<{ alertId: number; userId: number; expiresAtMs: number; usedAtMs: number | null } | null> {
    const r = await this.knex('ack_links').where({ nonce }).first();
    return r
      ? { alertId: Number(r.alert_id), userId: Number(r.user_id), expiresAtMs: new Date(r.expires_at).getTime(), usedAtMs: r.used_at ? new Date(r.used_at).getTime() : null }
      : null;
  }

  /** Marks a link used, once: false when it was used already. */
  async useAckLink(trx: Knex.Transaction, nonce: string): Promise<boolean> {
    const n = await trx('ack_links').where({ nonce }).whereNull('used_at').update({ used_at: trx.fn.now() });
    return n > 0;
  }

  // ------------------------------------------------------------------ webhooks

  async webhooks(activeOnly = false): Promise<{ id: number; url: string; description: string; secret: string; active: boolean; createdAt: string }[]> {
    const q = this.knex('webhook_endpoints').orderBy('id');
    if (activeOnly) q.where({ active: true });
    const rows = await q;
    return rows.map((r) => ({ id: Number(r.id), url: r.url, description: r.description, secret: r.secret, active: r.active, createdAt: iso(r.created_at)! }));
  }

  async addWebhook(w: { url: string; description: string; secret: string; createdBy: number }): Promise<number> {
    const [row] = await this.knex('webhook_endpoints').insert({ url: w.url, description: w.description, secret: w.secret, created_by: w.createdBy }).returning('id');
    return Number(row.id);
  }

  async updateWebhook(id: number, change: { active?: boolean; description?: string }): Promise<boolean> {
    const update: Record<string, unknown> = {};
    if (change.active !== undefined) update['active'] = change.active;
    if (change.description !== undefined) update['description'] = change.description;
    if (Object.keys(update).length === 0) return (await this.knex('webhook_endpoints').where({ id }).first('id')) !== undefined;
    return (await this.knex('webhook_endpoints').where({ id }).update(update)) > 0;
  }

  async deleteWebhook(id: number): Promise<boolean> {
    return (await this.knex('webhook_endpoints').where({ id }).delete()) > 0;
  }

  // ------------------------------------------------------------------ deliveries (the outbox)

  async enqueue(list: NewDelivery[]): Promise<number[]> {
    if (list.length === 0) return [];
    const rows = await this.knex('deliveries')
      .insert(
        list.map((d) => ({
          channel: d.channel,
          target: d.target,
          user_id: d.userId ?? null,
          endpoint_id: d.endpointId ?? null,
          subject: d.subject,
          content: JSON.stringify(d.content),
          alert_ids: JSON.stringify(d.alertIds),
        })),
      )
      .returning('id');
    return rows.map((r) => Number(r.id));
  }

  /** Claims due deliveries for sending (none is claimed twice). */
  async claimDue(limit: number): Promise<DeliveryRow[]> {
    const { rows } = await this.knex.raw(
      `update deliveries d set status = 'sending', attempts = d.attempts + 1
        where d.id in (select id from deliveries where status = 'pending' and next_attempt_at <= now()
                        order by next_attempt_at, id limit ? for update skip locked)
        returning d.id, d.channel, d.target, d.endpoint_id, d.subject, d.content, d.attempts`,
      [limit],
    );
    return (rows as any[]).map((r) => ({
      id: Number(r.id),
      channel: r.channel,
      target: r.target,
      endpointId: r.endpoint_id === null ? null : Number(r.endpoint_id),
      subject: r.subject,
      content: r.content,
      attempts: Number(r.attempts),
    }));
  }

  async markSent(id: number): Promise<void> {
    await this.knex('deliveries').where({ id }).update({ status: 'sent', sent_at: this.knex.fn.now(), last_error: null, next_attempt_at: null });
  }

  async markFailed(id: number, error: string, retryInMs: number | null): Promise<void> {
    await this.knex('deliveries')
      .where({ id })
      .update(
        retryInMs === null
          ? { status: 'failed', last_error: error.slice(0, 1000), next_attempt_at: null }
          : { status: 'pending', last_error: error.slice(0, 1000), next_attempt_at: this.knex.raw(`now() + make_interval(secs => ?)`, [retryInMs / 1000]) },
      );
  }

  /**
   * Deliveries a stopped process left in 'sending' go back to the queue (at start; one
   * service sends a database's outbox). One of them may have gone out just before the
   * stop: at least once, then, for those few.
   */
  async requeueSending(): Promise<number> {
    return this.knex('deliveries').where({ status: 'sending' }).update({ status: 'pending', next_attempt_at: this.knex.fn.now() });
  }

  async retry(id: number): Promise<boolean> {
    return (await this.knex('deliveries').where({ id }).whereIn('status', ['failed', 'pending']).update({ status: 'pending', next_attempt_at: this.knex.fn.now() })) > 0;
  }

  async deliveries(q: { channel?: 'email' | 'webhook'; status?: DeliveryStatus; limit: number; offset: number }): Promise<{ items: Delivery[]; total: number }> {
    const base = this.knex('deliveries');
    if (q.channel) base.where({ channel: q.channel });
    if (q.status) base.where(q.status === 'pending' ? (b: Knex.QueryBuilder) => b.whereIn('status', ['pending', 'sending']) : { status: q.status });
    const [{ count }] = await base.clone().count<{ count: string }[]>('* as count');
    const rows = await base.clone().orderBy('id', 'desc').limit(q.limit).offset(q.offset);
    return { items: rows.map(toDelivery), total: Number(count) };
  }

  async delivery(id: number): Promise<Delivery | null> {
    const r = await this.knex('deliveries').where({ id }).first();
    return r ? toDelivery(r) : null;
  }
}

function toDelivery(r: Record<string, any>): Delivery {
  return {
    id: Number(r.id),
    channel: r.channel,
    target: r.target,
    subject: r.subject,
    status: r.status === 'sending' ? 'pending' : r.status,
    attempts: Number(r.attempts),
    lastError: r.last_error ?? null,
    createdAt: iso(r.created_at)!,
    sentAt: iso(r.sent_at),
    nextAttemptAt: iso(r.next_attempt_at),
    alertIds: (r.alert_ids as number[]).map(Number),
  };
}
