// Daily partitions of innovation_samples: created ahead of need, dropped after the
// retention period. Partition names are innovation_samples_pYYYYMMDD (UTC days).
import type { Pool, PoolClient } from 'pg';

const DAY_MS = 86_400_000;

export function dayStart(tMs: number): number {
  return Math.floor(tMs / DAY_MS) * DAY_MS;
}

export function partitionName(dayMs: number): string {
  const d = new Date(dayMs);
  const ymd = `${d.getUTCFullYear()}${String(d.getUTCMonth() + 1).padStart(2, '0')}${String(d.getUTCDate()).padStart(2, '0')}`;
  return `innovation_samples_p${ymd}`;
}

export class PartitionManager {
  private readonly known = new Set<number>();
  /** Creations under way: the service's write lanes share this manager and wait for one another. */
  private readonly creating = new Map<number, Promise<void>>();

  /** Makes sure a partition exists for each day; names are built here from dates only. */
  async ensure(client: PoolClient | Pool, days: Iterable<number>): Promise<void> {
    for (const day of days) {
      if (this.known.has(day)) continue;
      let pending = this.creating.get(day);
      if (!pending) {
        pending = this.create(client, day).finally(() => this.creating.delete(day));
        this.creating.set(day, pending);
      }
      await pending;
    }
  }

  private async create(client: PoolClient | Pool, day: number): Promise<void> {
    const from = new Date(day).toISOString();
    const to = new Date(day + DAY_MS).toISOString();
    try {
      await client.query(
        `create table if not exists ${partitionName(day)} partition of innovation_samples for values from ('${from}') to ('${to}')`,
      );
    } catch (err) {
      // Another process (a second ingest worker) created it at the same moment: "if not
      // exists" does not cover a creation that is not yet committed.
      const code = (err as { code?: string }).code;
      if (code !== '42P07' && code !== '23505') throw err;
    }
    this.known.add(day);
  }

  /** Drops the partitions that lie wholly before now − retention. Returns the names dropped. */
  async dropExpired(pool: Pool, nowMs: number, retentionDays: number): Promise<string[]> {
    const cutoff = dayStart(nowMs - retentionDays * DAY_MS);
    const res = await pool.query<{ name: string }>(
      `select c.relname as name from pg_inherits i
         join pg_class c on c.oid = i.inhrelid
         join pg_class p on p.oid = i.inhparent
        where p.relname = 'innovation_samples'`,
    );
    const dropped: string[] = [];
    for (const { name } of res.rows) {
      const m = /^innovation_samples_p(\d{4})(\d{2})(\d{2})$/.exec(name);
      if (!m) continue;
      const day = Date.UTC(Number(m[1]), Number(m[2]) - 1, Number(m[3]));
      if (day < cutoff) {
        await pool.query(`drop table if exists ${name}`);
        this.known.delete(day);
        dropped.push(name);
      }
    }
    return dropped;
  }
}
