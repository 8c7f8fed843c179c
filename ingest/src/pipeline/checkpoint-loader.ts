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
