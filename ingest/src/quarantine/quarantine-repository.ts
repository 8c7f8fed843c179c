import type { Knex } from 'knex';
import type { QuarantineItem, QuarantineSummary } from '../../../shared/src/api/api-types';
import { escapeLike } from '../auth/users-repository';

export class QuarantineRepository {
  constructor(private readonly knex: Knex) {}

  async list(q: { unit?: string; reason?: string; q?: string; limit: number; offset: number }): Promise<{ total: number; items: QuarantineItem[] }> {
    const base = this.knex('quarantine');
    if (q.unit) base.where('unit_key', q.unit);
    if (q.reason) base.where('reason_code', q.reason);
    if (q.q) {
      const like = `%${escapeLike(q.q)}%`;
      base.where((w) => w.whereILike('reason', like).orWhereILike('topic', like));
    }
    const [{ count }] = await base.clone().count<{ count: string }[]>('* as count');
    const rows = await base.orderBy('received_at', 'desc').orderBy('id', 'desc').limit(q.limit).offset(q.offset).select('*');
    return {
      total: Number(count),
      items: rows.map((r) => ({
        id: Number(r.id),
        receivedAt: new Date(r.received_at).toISOString(),
        unitKey: r.unit_key,
        estimatorKey: r.estimator_key,
        topic: r.topic,
        reasonCode: r.reason_code,
        reason: r.reason,
        payloadBytes: Number(r.payload_bytes),
        payloadPreview: (r.payload as Buffer).subarray(0, 512).toString('utf8'),
        sampleIndex: r.sample_index === null ? null : Number(r.sample_index),
      })),
    };
  }

  async summary(sinceMs: number): Promise<QuarantineSummary> {
    const rows = await this.knex('quarantine')
      .where('received_at', '>=', new Date(sinceMs))
      .groupBy('unit_key', 'reason_code')
      .orderBy('n', 'desc')
      .select('unit_key', 'reason_code', this.knex.raw('count(*)::int as n'), this.knex.raw('max(received_at) as last_at'));
    return {
      since: new Date(sinceMs).toISOString(),
      rows: rows.map((r) => ({ unitKey: r.unit_key, reasonCode: r.reason_code, count: Number(r.n), lastAt: new Date(r.last_at).toISOString() })),
    };
  }
}
