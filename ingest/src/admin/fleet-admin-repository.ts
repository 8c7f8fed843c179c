import type { Knex } from 'knex';
import type { Site, Unit } from '../../../shared/src/api/api-types';

export class FleetAdminRepository {
  constructor(private readonly knex: Knex) {}

  async sites(): Promise<Site[]> {
    const rows = await this.knex('sites as s')
      .leftJoin('units as u', 'u.site_id', 's.id')
      .groupBy('s.id')
      .orderBy('s.key')
      .select('s.id', 's.key', 's.name', 's.time_zone', this.knex.raw('count(u.id)::int as units'));
    return rows.map((r) => ({ id: Number(r.id), key: r.key, name: r.name, timeZone: r.time_zone, units: Number(r.units) }));
  }

  async units(q: { site?: string; limit: number; offset: number }): Promise<{ total: number; items: Unit[] }> {
    const base = this.knex('units as u').join('sites as s', 's.id', 'u.site_id');
    if (q.site) base.where('s.key', q.site);
    const [{ count }] = await base.clone().count<{ count: string }[]>('* as count');
    const rows = await base
      .orderBy('u.key')
      .limit(q.limit)
      .offset(q.offset)
      .select(
        'u.id',
        'u.key',
        'u.name',
        'u.kind',
        's.key as site_key',
        's.name as site_name',
        this.knex.raw('(select count(*)::int from estimators e where e.unit_id = u.id) as estimators'),
        this.knex.raw('(select count(*)::int from device_credentials c where c.unit_id = u.id and c.revoked_at is null) as credentials'),
      );
    return {
      total: Number(count),
      items: rows.map((r) => ({
        id: Number(r.id),
        key: r.key,
        name: r.name,
        kind: r.kind,
        siteKey: r.site_key,
        siteName: r.site_name,
        estimators: Number(r.estimators),
        credentials: Number(r.credentials),
      })),
    };
  }

  unit(id: number) {
    return this.knex('units').where({ id }).first<{ id: number; key: string; partition: number } | undefined>('id', 'key', 'partition');
  }

  /** Revokes the unit's current credentials and stores a new one, in one transaction. */
  async replaceCredential(unitId: number, username: string, secretHash: string): Promise<void> {
    await this.knex.transaction(async (trx) => {
      await trx('device_credentials').where({ unit_id: unitId }).whereNull('revoked_at').update({ revoked_at: trx.fn.now() });
      // Usernames are unique across history: a rotated credential gets a fresh suffix.
      await trx('device_credentials').where({ username }).update({ username: trx.raw(`username || '#revoked-' || id`) });
      await trx('device_credentials').insert({ unit_id: unitId, username, secret_hash: secretHash });
    });
  }

  async revokeCredentials(unitId: number): Promise<number> {
    return this.knex('device_credentials').where({ unit_id: unitId }).whereNull('revoked_at').update({ revoked_at: this.knex.fn.now() });
  }
}
