// The batch writer: everything the pipeline stores goes through here, in one
// transaction per batch (never a round trip per sample). A caller's promise resolves
// only once its rows are committed; the broker acknowledges a sample (PUBACK) then,
// so "acknowledged" means "committed". While PostgreSQL is down the batch is retried
// with backoff and kept in memory; `pendingSamples()` lets the broker stop taking
// new samples beyond a bound, so units hold and resend instead of the service growing.
import type { Pool, PoolClient } from 'pg';
import type { Logger } from '../logger';
import { PartitionManager, dayStart } from './partitions';

export type VerdictWord = 'consistent' | 'marginal' | 'inconsistent' | 'silent';

export interface SampleRow {
  estimatorId: number;
  tMs: number;
  seq: number;
  nis: number;
  cusumUp: number;
  cusumDown: number;
  /** Innovation and whitened innovation as little-endian float32 (m values each, so equally long). */
  nu: Buffer;
  w: Buffer;
  /** For the minute rollup: did this sample's NIS exceed its single-sample bound, and the verdict after it. */
  exceeded: boolean;
  verdict: VerdictWord;
}

export interface QuarantineRow {
  receivedAtMs: number;
  unitKey: string | null;
  estimatorKey: string | null;
  estimatorId: number | null;
  topic: string;
  reasonCode: string;
  reason: string;
  payload: Buffer;
  payloadBytes: number;
  sampleIndex: number | null;
}

export interface StatusRow {
  estimatorId: number;
  verdict: VerdictWord;
  verdictSinceMs: number;
  lastSampleAtMs: number | null;
  lastReceivedAtMs: number | null;
  lastSeq: number | null;
  samplesAdded: number;
  window: unknown;
  /** The window tests' combined p-value (fleet screening) and mean NIS / m (sorting), when known. */
  pValue: number | null;
  nisRatio: number | null;
}

export interface CheckpointRow {
  estimatorId: number;
  state: unknown;
  samplesSeen: number;
}

export type AlertOp =
  | {
      kind: 'open';
      estimatorId: number | null;
      unitId: number | null;
      rule: string;
      severity: 'info' | 'warning' | 'critical';
      summary: string;
      evidence: unknown;
      atMs: number;
    }
  | { kind: 'evidence'; estimatorId: number | null; unitId: number | null; rule: string; evidence: unknown; atMs: number }
  | { kind: 'clear'; estimatorId: number | null; unitId: number | null; rule: string; evidence: unknown; atMs: number };

export interface WriteParts {
  samples?: SampleRow[];
  quarantine?: QuarantineRow[];
  status?: StatusRow[];
  checkpoints?: CheckpointRow[];
  alerts?: AlertOp[];
}

/** Where a commit's time went, in ms (wall time, so waits for the event loop count). */
export interface CommitPhases {
  /** Gathering the batch's rows. */
  prepare: number;
  /** Connection, partitions, begin. */
  connect: number;
  /** The one statement that stores samples, rollups, status, checkpoints, quarantine. */
  store: number;
  /** Alert changes, one statement each. */
  alerts: number;
  commit: number;
}

interface Entry {
  parts: WriteParts;
  resolve: () => void;
}

export interface BatchWriterOptions {
  pool: Pool;
  logger: Logger;
  /** Samples per transaction at most (default 2000). */
  maxBatchSamples?: number;
  /** How long the first pending item waits for company before a flush (default 20 ms). */
  lingerMs?: number;
  /**
   * Write lanes (default 2): each has its own queue, connection and transactions, and a
   * unit's writes always take the same lane, so one unit's messages commit (and are
   * acknowledged) in the order they came, while two lanes let PostgreSQL store one batch
   * as the next is being prepared and sent. Every row a batch upserts (status,
   * checkpoints, rollups, alerts) belongs to one estimator and so to one unit: lanes
   * never touch the same rows.
   */
  lanes?: number;
  /** Called after each committed batch (for metrics). */
  onCommitted?: (info: { samples: number; quarantined: number; ms: number; phases: CommitPhases }) => void;
}

const VERDICT_RANK = `array['consistent','marginal','inconsistent','silent']`;

/** Which lane a unit's writes take (FNV-1a over its key). */
export function laneOf(unitKey: string, lanes: number): number {
  let h = 0x811c9dc5;
  for (let i = 0; i < unitKey.length; i++) {
    h ^= unitKey.charCodeAt(i);
    h = Math.imul(h, 0x01000193);
  }
  return (h >>> 0) % lanes;
}

export class BatchWriter {
  private readonly lanes: WriteLane[];

  constructor(options: BatchWriterOptions) {
    const n = Math.max(1, Math.floor(options.lanes ?? 2));
    const partitions = new PartitionManager();
    this.lanes = Array.from({ length: n }, () => new WriteLane(options, partitions));
  }

  get laneCount(): number {
    return this.lanes.length;
  }

  /** Samples waiting to be committed, over all lanes. */
  pendingSamples(): number {
    let n = 0;
    for (const lane of this.lanes) n += lane.pendingSamples();
    return n;
  }

  /** True while the last attempt to write failed in some lane (the database is unreachable or refusing). */
  isFailing(): boolean {
    return this.lanes.some((l) => l.isFailing());
  }

  /**
   * Queues rows for commit; resolves once they are committed. `unitKey` picks the lane:
   * every write about one unit's estimators must give the same key (the unit's key).
   */
  write(parts: WriteParts, unitKey = ''): Promise<void> {
    return this.lanes[laneOf(unitKey, this.lanes.length)].write(parts);
  }

  /** Writes rows about several units, each unit's in its own lane; resolves once all are committed. */
  async writeByUnit(items: { unitKey: string; parts: WriteParts }[]): Promise<void> {
    const byLane = new Map<number, Required<WriteParts>>();
    for (const { unitKey, parts } of items) {
      const lane = laneOf(unitKey, this.lanes.length);
      let into = byLane.get(lane);
      if (!into) byLane.set(lane, (into = { samples: [], quarantine: [], status: [], checkpoints: [], alerts: [] }));
      for (const key of ['samples', 'quarantine', 'status', 'checkpoints', 'alerts'] as const) {
        const rows = parts[key];
        if (rows) for (const r of rows) (into[key] as unknown[]).push(r);
      }
    }
    await Promise.all([...byLane].map(([lane, parts]) => this.lanes[lane].write(parts)));
  }

  /** Resolves once everything queued so far, in every lane, is committed. */
  async drain(): Promise<void> {
    await Promise.all(this.lanes.map((l) => l.drain()));
  }

  async close(): Promise<void> {
    await Promise.all(this.lanes.map((l) => l.close()));
  }
}

class WriteLane {
  private readonly pool: Pool;
  private readonly logger: Logger;
  private readonly maxBatchSamples: number;
  private readonly lingerMs: number;
  private queue: Entry[] = [];
  private queuedSamples = 0;
  private timer: NodeJS.Timeout | null = null;
  private flushing = false;
  private closed = false;
  private failingSince: number | null = null;
  private idleWaiters: (() => void)[] = [];
  private client: PoolClient | null = null;

  constructor(
    private readonly options: BatchWriterOptions,
    private readonly partitions: PartitionManager,
  ) {
    this.pool = options.pool;
    this.logger = options.logger;
    this.maxBatchSamples = options.maxBatchSamples ?? 2000;
    this.lingerMs = options.lingerMs ?? 20;
  }

  pendingSamples(): number {
    return this.queuedSamples;
  }

  isFailing(): boolean {
    return this.failingSince !== null;
  }

  write(parts: WriteParts): Promise<void> {
    if (this.closed) return Promise.reject(new Error('writer is closed'));
    return new Promise<void>((resolve) => {
      this.queue.push({ parts, resolve });
      this.queuedSamples += parts.samples?.length ?? 0;
      this.schedule();
    });
  }

  /** Resolves once everything queued so far is committed. */
  drain(): Promise<void> {
    if (this.queue.length === 0 && !this.flushing) return Promise.resolve();
    return new Promise((resolve) => {
      this.idleWaiters.push(resolve);
      this.schedule(true);
    });
  }

  async close(): Promise<void> {
    await this.drain();
    this.closed = true;
    if (this.timer) clearTimeout(this.timer);
    this.client?.release();
    this.client = null;
  }

  private schedule(now = false): void {
    if (this.flushing) return;
    if (now || this.queuedSamples >= this.maxBatchSamples) {
      if (this.timer) clearTimeout(this.timer);
      this.timer = null;
      void this.flushLoop();
      return;
    }
    if (!this.timer) {
      this.timer = setTimeout(() => {
        this.timer = null;
        void this.flushLoop();
      }, this.lingerMs);
    }
  }

  private async flushLoop(): Promise<void> {
    if (this.flushing) return;
    this.flushing = true;
    let backoff = 100;
    try {
      while (this.queue.length > 0) {
        let n = 0;
        let samples = 0;
        while (n < this.queue.length && (n === 0 || samples + (this.queue[n].parts.samples?.length ?? 0) <= this.maxBatchSamples)) {
          samples += this.queue[n].parts.samples?.length ?? 0;
          n += 1;
        }
        const batch = this.queue.slice(0, n);
        const started = performance.now();
        let phases: CommitPhases;
        try {
          phases = await this.commit(batch.map((e) => e.parts));
        } catch (err) {
          if (this.failingSince === null) {
            this.failingSince = Date.now();
            this.logger.error({ err: (err as Error).message }, 'database write failed; holding the batch and retrying');
          }
          await new Promise((r) => setTimeout(r, backoff));
          backoff = Math.min(backoff * 2, 5000);
          continue;
        }
        if (this.failingSince !== null) {
          this.logger.info({ downForMs: Date.now() - this.failingSince }, 'database writes resumed');
          this.failingSince = null;
        }
        backoff = 100;
        this.queue = this.queue.slice(n);
        this.queuedSamples -= samples;
        const quarantined = batch.reduce((a, e) => a + (e.parts.quarantine?.length ?? 0), 0);
        this.options.onCommitted?.({ samples, quarantined, ms: performance.now() - started, phases });
        for (const e of batch) e.resolve();
        // Let more arrive when the queue is small: batches of one sample help nobody.
        if (this.queue.length > 0 && this.queuedSamples < this.maxBatchSamples / 10) {
          await new Promise((r) => setTimeout(r, this.lingerMs));
        }
      }
    } finally {
      this.flushing = false;
      if (this.queue.length > 0) this.schedule();
      else {
        const waiters = this.idleWaiters;
        this.idleWaiters = [];
        for (const w of waiters) w();
      }
    }
  }

  private async commit(all: WriteParts[]): Promise<CommitPhases> {
    const phases: CommitPhases = { prepare: 0, connect: 0, store: 0, alerts: 0, commit: 0 };
    let mark = performance.now();
    const lap = (phase: keyof CommitPhases) => {
      const now = performance.now();
      phases[phase] += now - mark;
      mark = now;
    };
    const samples = all.flatMap((p) => p.samples ?? []);
    const quarantine = all.flatMap((p) => p.quarantine ?? []);
    const alerts = all.flatMap((p) => p.alerts ?? []);
    // The latest status and checkpoint per estimator win; sample counts add up.
    const status = new Map<number, StatusRow>();
    for (const p of all) {
      for (const s of p.status ?? []) {
        const prev = status.get(s.estimatorId);
        status.set(s.estimatorId, prev ? { ...s, samplesAdded: prev.samplesAdded + s.samplesAdded } : s);
      }
    }
    const checkpoints = new Map<number, CheckpointRow>();
    for (const p of all) for (const c of p.checkpoints ?? []) checkpoints.set(c.estimatorId, c);

    lap('prepare');
    const client = await this.connection();
    try {
      if (samples.length > 0) await this.partitions.ensure(client, new Set(samples.map((s) => dayStart(s.tMs))));
      // One statement stores samples, rollups, status, checkpoints and quarantine: a
      // statement is its own transaction, and one round trip waits for the event loop
      // once instead of once per table. Alert changes, rarer, need a transaction around it.
      const transaction = alerts.length > 0;
      if (transaction) await client.query('begin');
      lap('connect');
      await client.query({ name: 'wc_store_batch', text: STORE_BATCH, values: storeBatchValues(samples, quarantine, [...status.values()], [...checkpoints.values()]) });
      lap('store');
      for (const op of alerts) await applyAlertOp(client, op);
      lap('alerts');
      if (transaction) await client.query('commit');
      lap('commit');
      return phases;
    } catch (err) {
      await client.query('rollback').catch(() => undefined);
      // A connection that failed mid-transaction is not reused.
      this.dropConnection(err as Error);
      throw err;
    }
  }

  /** The writer's own connection, kept between batches. */
  private async connection(): Promise<PoolClient> {
    if (!this.client) {
      const client = await this.pool.connect();
      // A checked-out client has no error listener of the pool's: the server ending the
      // session while it waits between batches would otherwise crash the process.
      client.on('error', (err: Error) => {
        this.logger.warn({ err: err.message }, 'the database ended the writer\'s connection');
        if (this.client === client) this.dropConnection(err);
      });
      this.client = client;
    }
    return this.client;
  }

  private dropConnection(err: Error): void {
    this.client?.release(err);
    this.client = null;
  }
}

// $7 and $8 are every sample's innovation and whitened innovation end to end, sent as two
// binary parameters; $42 and $43 give each sample's offset and length in them.
const SAMPLE_COLUMNS = `$1::int[], $2::float8[], $3::int[], $4::real[], $5::real[], $6::real[], $42::int[], $43::int[]`;
const ROLLUP_COLUMNS = `$9::int[], $10::float8[], $11::int[], $12::float8[], $13::real[], $14::real[], $15::int[], $16::real[], $17::real[], $18::text[]`;
const STATUS_COLUMNS = `$19::int[], $20::text[], $21::float8[], $22::float8[], $23::float8[], $24::bigint[], $25::bigint[], $26::jsonb[], $27::float8[], $28::real[]`;
const CHECKPOINT_COLUMNS = `$29::int[], $30::jsonb[], $31::bigint[]`;
const QUARANTINE_COLUMNS = `$32::float8[], $33::text[], $34::text[], $35::int[], $36::text[], $37::text[], $38::text[], $39::bytea[], $40::int[], $41::int[]`;

const STORE_BATCH = `
with samples as (
  insert into innovation_samples (estimator_id, t, seq, nis, cusum_up, cusum_down, nu, w)
  select e, to_timestamp(t), seq, nis, up, down, substring($7::bytea from o + 1 for n), substring($8::bytea from o + 1 for n)
    from unnest(${SAMPLE_COLUMNS}) as u(e, t, seq, nis, up, down, o, n)
  on conflict do nothing
), rollups as (
  insert into estimator_rollups_minute as r (estimator_id, minute, samples, nis_sum, nis_min, nis_max, exceedances, cusum_up_max, cusum_down_max, verdict)
  select e, to_timestamp(m), n, s, mn, mx, ex, up, down, v
    from unnest(${ROLLUP_COLUMNS}) as u(e, m, n, s, mn, mx, ex, up, down, v)
  on conflict (estimator_id, minute) do update set
    samples = r.samples + excluded.samples,
    nis_sum = r.nis_sum + excluded.nis_sum,
    nis_min = least(r.nis_min, excluded.nis_min),
    nis_max = greatest(r.nis_max, excluded.nis_max),
    exceedances = r.exceedances + excluded.exceedances,
    cusum_up_max = greatest(r.cusum_up_max, excluded.cusum_up_max),
    cusum_down_max = greatest(r.cusum_down_max, excluded.cusum_down_max),
    verdict = (${VERDICT_RANK})[greatest(array_position(${VERDICT_RANK}, r.verdict), array_position(${VERDICT_RANK}, excluded.verdict))]
), status as (
  insert into estimator_status as s (estimator_id, verdict, verdict_since, last_sample_at, last_received_at, last_seq, samples_total, "window", p_value, nis_ratio, updated_at)
  select e, v, to_timestamp(since), to_timestamp(ls), to_timestamp(lr), seq, n, w, p, r, now()
    from unnest(${STATUS_COLUMNS}) as u(e, v, since, ls, lr, seq, n, w, p, r)
  on conflict (estimator_id) do update set
    verdict = excluded.verdict,
    verdict_since = excluded.verdict_since,
    last_sample_at = coalesce(greatest(s.last_sample_at, excluded.last_sample_at), s.last_sample_at, excluded.last_sample_at),
    last_received_at = coalesce(greatest(s.last_received_at, excluded.last_received_at), s.last_received_at, excluded.last_received_at),
    last_seq = coalesce(excluded.last_seq, s.last_seq),
    samples_total = s.samples_total + excluded.samples_total,
    "window" = excluded."window",
    p_value = excluded.p_value,
    nis_ratio = excluded.nis_ratio,
    updated_at = now()
), checkpoints as (
  insert into estimator_checkpoints as c (estimator_id, state, samples_seen, saved_at)
  select e, s, n, now() from unnest(${CHECKPOINT_COLUMNS}) as u(e, s, n)
  on conflict (estimator_id) do update set state = excluded.state, samples_seen = excluded.samples_seen, saved_at = now()
), quarantined as (
  insert into quarantine (received_at, unit_key, estimator_key, estimator_id, topic, reason_code, reason, payload, payload_bytes, sample_index)
  select to_timestamp(at), u, ek, e, topic, code, reason, payload, bytes, idx
    from unnest(${QUARANTINE_COLUMNS}) as x(at, u, ek, e, topic, code, reason, payload, bytes, idx)
)
select 1`;

function storeBatchValues(unsorted: SampleRow[], quarantine: QuarantineRow[], status: StatusRow[], checkpoints: CheckpointRow[]): unknown[] {
  // In key order: neighbouring index entries land on the same pages.
  const rows = unsorted.slice().sort((a, b) => a.estimatorId - b.estimatorId || a.seq - b.seq);
  const samples = sampleColumns(rows);
  return [
    ...samples.columns,
    ...rollupColumns(rows),
    ...statusColumns(status),
    rowsOf(checkpoints, (r) => r.estimatorId),
    rowsOf(checkpoints, (r) => JSON.stringify(r.state)),
    rowsOf(checkpoints, (r) => r.samplesSeen),
    ...quarantineColumns(quarantine),
    samples.offsets,
    samples.lengths,
  ];
}

function rowsOf<R, V>(rows: readonly R[], pick: (r: R) => V): V[] {
  const out = new Array<V>(rows.length);
  for (let i = 0; i < rows.length; i++) out[i] = pick(rows[i]);
  return out;
}

/**
 * The sample columns as PostgreSQL array literals built here, and the innovations as
 * two binary blobs: node-postgres would escape each of the tens of thousands of
 * elements one by one on the event loop (a measured 100–300 ms stall per batch).
 */
function sampleColumns(rows: SampleRow[]): { columns: unknown[]; offsets: string; lengths: string } {
  const n = rows.length;
  const e = new Array<number>(n);
  const t = new Array<number>(n);
  const seq = new Array<number>(n);
  const nis = new Array<number>(n);
  const up = new Array<number>(n);
  const down = new Array<number>(n);
  const off = new Array<number>(n);
  const len = new Array<number>(n);
  const nu = new Array<Buffer>(n);
  const w = new Array<Buffer>(n);
  let at = 0;
  for (let i = 0; i < n; i++) {
    const r = rows[i];
    e[i] = r.estimatorId;
    t[i] = r.tMs / 1000;
    seq[i] = r.seq;
    nis[i] = r.nis;
    up[i] = r.cusumUp;
    down[i] = r.cusumDown;
    nu[i] = r.nu;
    w[i] = r.w;
    off[i] = at;
    len[i] = r.nu.length;
    at += r.nu.length;
  }
  return {
    columns: [numberArray(e), numberArray(t), numberArray(seq), numberArray(nis), numberArray(up), numberArray(down), Buffer.concat(nu, at), Buffer.concat(w, at)],
    offsets: numberArray(off),
    lengths: numberArray(len),
  };
}

/** '{1,2.5,-3e-7}': finite numbers only (the pipeline has checked them). */
export function numberArray(values: number[]): string {
  return `{${values.join(',')}}`;
}

function rollupColumns(rows: SampleRow[]): unknown[] {
  const rank = (v: VerdictWord) => ['consistent', 'marginal', 'inconsistent', 'silent'].indexOf(v);
  const agg = new Map<string, { e: number; minute: number; n: number; sum: number; min: number; max: number; ex: number; up: number; down: number; verdict: VerdictWord }>();
  for (const r of rows) {
    const minute = Math.floor(r.tMs / 60_000) * 60_000;
    const key = `${r.estimatorId}:${minute}`;
    const a = agg.get(key);
    if (!a) {
      agg.set(key, { e: r.estimatorId, minute, n: 1, sum: r.nis, min: r.nis, max: r.nis, ex: r.exceeded ? 1 : 0, up: r.cusumUp, down: r.cusumDown, verdict: r.verdict });
    } else {
      a.n += 1;
      a.sum += r.nis;
      a.min = Math.min(a.min, r.nis);
      a.max = Math.max(a.max, r.nis);
      a.ex += r.exceeded ? 1 : 0;
      a.up = Math.max(a.up, r.cusumUp);
      a.down = Math.max(a.down, r.cusumDown);
      if (rank(r.verdict) > rank(a.verdict)) a.verdict = r.verdict;
    }
  }
  const list = [...agg.values()];
  return [
    rowsOf(list, (a) => a.e),
    rowsOf(list, (a) => a.minute / 1000),
    rowsOf(list, (a) => a.n),
    rowsOf(list, (a) => a.sum),
    rowsOf(list, (a) => a.min),
    rowsOf(list, (a) => a.max),
    rowsOf(list, (a) => a.ex),
    rowsOf(list, (a) => a.up),
    rowsOf(list, (a) => a.down),
    rowsOf(list, (a) => a.verdict),
  ];
}

function statusColumns(rows: StatusRow[]): unknown[] {
  return [
    rowsOf(rows, (r) => r.estimatorId),
    rowsOf(rows, (r) => r.verdict),
    rowsOf(rows, (r) => r.verdictSinceMs / 1000),
    rowsOf(rows, (r) => (r.lastSampleAtMs === null ? null : r.lastSampleAtMs / 1000)),
    rowsOf(rows, (r) => (r.lastReceivedAtMs === null ? null : r.lastReceivedAtMs / 1000)),
    rowsOf(rows, (r) => r.lastSeq),
    rowsOf(rows, (r) => r.samplesAdded),
    rowsOf(rows, (r) => JSON.stringify(r.window ?? {})),
    rowsOf(rows, (r) => r.pValue),
    rowsOf(rows, (r) => r.nisRatio),
  ];
}

function quarantineColumns(rows: QuarantineRow[]): unknown[] {
  return [
    rowsOf(rows, (r) => r.receivedAtMs / 1000),
    rowsOf(rows, (r) => r.unitKey),
    rowsOf(rows, (r) => r.estimatorKey),
    rowsOf(rows, (r) => r.estimatorId),
    rowsOf(rows, (r) => r.topic),
    rowsOf(rows, (r) => r.reasonCode),
    rowsOf(rows, (r) => r.reason),
    rowsOf(rows, (r) => r.payload),
    rowsOf(rows, (r) => r.payloadBytes),
    rowsOf(rows, (r) => r.sampleIndex),
  ];
}

const LIVE_ALERT = `coalesce(estimator_id, 0) = coalesce($1::int, 0) and coalesce(unit_id, 0) = coalesce($2::int, 0) and rule = $3 and state <> 'resolved'`;

async function applyAlertOp(client: PoolClient, op: AlertOp): Promise<void> {
  const at = op.atMs / 1000;
  if (op.kind === 'open') {
    const res = await client.query<{ id: string }>(
      `insert into alerts (estimator_id, unit_id, rule, severity, state, summary, evidence, opened_at, last_evidence_at)
       values ($1, $2, $3, $4, 'open', $5, $6, to_timestamp($7), to_timestamp($7))
       on conflict do nothing returning id`,
      [op.estimatorId, op.unitId, op.rule, op.severity, op.summary, JSON.stringify(op.evidence), at],
    );
    if (res.rows[0]) {
      await client.query(
        `insert into alert_events (alert_id, at, kind, data) values ($1, to_timestamp($2), 'opened', $3)`,
        [res.rows[0].id, at, JSON.stringify(op.evidence)],
      );
    } else {
      // Already live (an earlier open that survived a restart): refresh its evidence.
      await client.query(
        `update alerts set evidence = $4, last_evidence_at = to_timestamp($5), condition_cleared_at = null where ${LIVE_ALERT}`,
        [op.estimatorId, op.unitId, op.rule, JSON.stringify(op.evidence), at],
      );
    }
  } else if (op.kind === 'evidence') {
    await client.query(`update alerts set evidence = $4, last_evidence_at = to_timestamp($5) where ${LIVE_ALERT}`, [
      op.estimatorId,
      op.unitId,
      op.rule,
      JSON.stringify(op.evidence),
      at,
    ]);
  } else {
    const res = await client.query<{ id: string }>(
      `update alerts set state = 'resolved', resolved_at = to_timestamp($4), condition_cleared_at = to_timestamp($4)
        where ${LIVE_ALERT} returning id`,
      [op.estimatorId, op.unitId, op.rule, at],
    );
    for (const row of res.rows) {
      await client.query(
        `insert into alert_events (alert_id, at, kind, note, data) values ($1, to_timestamp($2), 'cleared', 'condition cleared for the hold time', $3)`,
        [row.id, at, JSON.stringify(op.evidence)],
      );
    }
  }
}
