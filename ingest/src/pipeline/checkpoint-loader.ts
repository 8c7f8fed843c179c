// Reads estimators' checkpoints and status when their first sample arrives. Requests
// made in the same turn of the event loop share one query: after a restart under load
// the whole fleet asks within a second, and one round trip per estimator (two, with the
// status) would hold every first message back behind thousands of queries.
import type { Knex } from 'knex';
import type { StatusRow, VerdictWord } from './batch-writer';

export interface SavedStream {
  state: unknown;
  status: Partial<StatusRow> | null;
}

const ms = (d: Date | null | undefined): number | null => (d ? d.getTime() : null);

export class CheckpointLoader {
  private waiting = new Map<number, { resolve: (s: SavedStream | null) => void; reject: (e: Error) => void }[]>();
  private scheduled = false;

  constructor(private readonly knex: Knex) {}

  load(estimatorId: number): Promise<SavedStream | null> {
    return new Promise((resolve, reject) => {
      const list = this.waiting.get(estimatorId);
      if (list) list.push({ resolve, reject });
      else this.waiting.set(estimatorId, [{ resolve, reject }]);
      if (!this.scheduled) {
        this.scheduled = true;
        setImmediate(() => void this.flush());
      }
    });
  }

  private after = new Map<number, { seq: number; waiters: { resolve: (rows: { seq: number; t: number }[]) => void; reject: (e: Error) => void }[] }>();
  private afterScheduled = false;

  /**
   * The samples stored for an estimator with a sequence number above `seq`, in order:
   * those committed after its checkpoint; at most 2048 (twice what the sequence
   * check remembers). Requests in one turn of the event loop share one query.
   */
  storedAfter(estimatorId: number, seq: number): Promise<{ seq: number; t: number }[]> {
    return new Promise((resolve, reject) => {
      const entry = this.after.get(estimatorId);
      if (entry) entry.waiters.push({ resolve, reject });
      else this.after.set(estimatorId, { seq, waiters: [{ resolve, reject }] });
      if (!this.afterScheduled) {
        this.afterScheduled = true;
        setImmediate(() => void this.flushAfter());
      }
    });
  }

  private async flushAfter(limit = 2048): Promise<void> {
    const batch = this.after;
    this.after = new Map();
    this.afterScheduled = false;
    const ids = [...batch.keys()];
    try {
      const res = await this.knex.raw<{ rows: { estimator_id: number; seq: string; t: Date }[] }>(
        `select q.e as estimator_id, s.seq, s.t
           from unnest(?::int[], ?::bigint[]) as q(e, after)
           cross join lateral (
             select seq, t from innovation_samples
              where estimator_id = q.e and seq > q.after
              order by seq limit ?
           ) s`,
        [ids, ids.map((id) => batch.get(id)!.seq), limit],
      );
      const rowsOf = new Map<number, { seq: number; t: number }[]>();
      for (const r of res.rows) {
        const id = Number(r.estimator_id);
        let list = rowsOf.get(id);
        if (!list) rowsOf.set(id, (list = []));
        list.push({ seq: Number(r.seq), t: r.t.getTime() });
      }
      for (const [id, { waiters }] of batch) for (const w of waiters) w.resolve(rowsOf.get(id) ?? []);
    } catch (err) {
      for (const { waiters } of batch.values()) for (const w of waiters) w.reject(err as Error);
    }
  }

  private async flush(): Promise<void> {
    const batch = this.waiting;
    this.waiting = new Map();
    this.scheduled = false;
    const ids = [...batch.keys()];
    try {
      const [checkpoints, statuses] = await Promise.all([
        this.knex('estimator_checkpoints').whereIn('estimator_id', ids).select('estimator_id', 'state'),
        this.knex('estimator_status')
          .whereIn('estimator_id', ids)
          .select('estimator_id', 'verdict', 'verdict_since', 'last_sample_at', 'last_received_at', 'last_seq'),
      ]);
      const stateOf = new Map(checkpoints.map((r) => [Number(r.estimator_id), r.state as unknown]));
      const statusOf = new Map(statuses.map((st) => [Number(st.estimator_id), st]));
      for (const [id, waiters] of batch) {
        const st = statusOf.get(id);
        const state = stateOf.get(id);
        const saved: SavedStream | null =
          state === undefined && !st
            ? null
            : {
                state: state ?? null,
                status: st
                  ? {
                      verdict: st.verdict as VerdictWord,
                      verdictSinceMs: ms(st.verdict_since) ?? undefined,
                      lastSampleAtMs: ms(st.last_sample_at),
                      lastReceivedAtMs: ms(st.last_received_at),
                      lastSeq: st.last_seq === null ? null : Number(st.last_seq),
                    }
                  : null,
              };
        for (const w of waiters) w.resolve(saved);
      }
    } catch (err) {
      for (const waiters of batch.values()) for (const w of waiters) w.reject(err as Error);
    }
  }
}
