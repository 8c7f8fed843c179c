// Partitioned ingest workers behind an external broker (docs/scaling.md). The fleet is cut
// into WHITECAP_PARTITIONS partitions (units.partition, given at provisioning); each worker
// holds some of them, and only the holder of a partition takes its messages and keeps its
// estimators' checks in memory:
//
// - Claims are PostgreSQL session advisory locks, pg_try_advisory_lock(PARTITION_LOCK, p),
//   taken on one dedicated connection per worker (not pooled). A worker that dies, or
//   whose session dies, loses its locks with it; the others see the partitions free and
//   take them over.
// - Each worker also holds a presence lock, (WORKER_LOCK, its backend pid): the number of
//   presence locks is the number of live workers, exact and at once (a dead session's
//   locks are gone the moment PostgreSQL notices). Every second a worker claims up to its
//   fair share, ceil(partitions / live workers), and lets go of partitions beyond it (a
//   new worker joined); it records its heartbeat in ingest_workers and each claim in
//   partition_claims.
// - A claimed partition gets its own MQTT connection with client id
//   `{prefix}whitecap-partition-{p}` and a persistent session (clean: false) subscribed
//   with QoS 1 to whitecap/v1/partitions/{p}/units/+/estimators/+/innovations. The session
//   belongs to the partition, not to the worker: what was queued for it, or delivered and
//   not acknowledged, when its last holder died goes to the next holder.
// - Letting go of a partition: its connection stops taking messages and finishes the one
//   in hand (committed, acknowledged), disconnects leaving the session (and its
//   subscription) to the broker, then its estimators' status and checkpoints are written
//   and committed and their checks forgotten, and only then is the lock released. The next
//   holder loads the checks from those checkpoints on claiming.
// - Losing the database session is losing every claim: the connections are dropped at
//   once and the checks forgotten without writing anything (another worker may be
//   writing them already). A connection reconnects to the broker only after checking
//   that its partition's lock is still held, so a worker never takes a session back from
//   the partition's new holder.
import { randomUUID } from 'node:crypto';
import type { Knex } from 'knex';
import pg from 'pg';
import type { Clock } from '../clock';
import type { MessageSource, PartitionsReport } from '../health/health-service';
import type { Logger } from '../logger';
import type { Metrics } from '../metrics';
import type { RuleName } from '../pipeline/alert-rules';
import type { EstimatorInfo, EstimatorRegistry } from '../pipeline/estimator-registry';
import type { IngestPipeline } from '../pipeline/ingest-pipeline';
import { startExternalSubscriber, type ExternalSubscriber } from './external-subscriber';
import { parsePartitionedInnovationsTopic, partitionFilter, unitPartition } from './topics';

/** Advisory lock classes (the first key of the two-int form): 'Wc' 0001 and 0002. */
export const PARTITION_LOCK = 0x57630001;
export const WORKER_LOCK = 0x57630002;

/** Each worker's share of the partitions: ceil(partitions / live workers). */
export function fairShare(partitions: number, liveWorkers: number): number {
  return Math.ceil(partitions / Math.max(1, liveWorkers));
}

/**
 * What a worker does on one round: the partitions to let go of (those beyond its fair
 * share, highest numbers first) and, below its share, the free ones to try, starting at
 * `start` and going round (workers start at different places so they rarely race for
 * the same partition).
 */
export function planClaims(p: { partitions: number; liveWorkers: number; held: number[]; heldByOthers: number[]; start: number }): {
  release: number[];
  claim: number[];
} {
  const share = fairShare(p.partitions, p.liveWorkers);
  if (p.held.length > share) {
    return { release: [...p.held].sort((a, b) => b - a).slice(0, p.held.length - share), claim: [] };
  }
  const taken = new Set([...p.held, ...p.heldByOthers]);
  const claim: number[] = [];
  for (let k = 0; k < p.partitions && claim.length < share - p.held.length; k++) {
    const q = (p.start + k) % p.partitions;
    if (!taken.has(q)) claim.push(q);
  }
  return { release: [], claim };
}

/** The MQTT client id of a partition's session. */
export function partitionClientId(prefix: string, partition: number): string {
  return `${prefix}whitecap-partition-${partition}`;
}

/** Units' partitions, read once per unit (a unit keeps its partition). */
export class UnitPartitions {
  private readonly known = new Map<string, number>();

  constructor(private readonly knex: Knex) {}

  get(unitKey: string): number | undefined {
    return this.known.get(unitKey);
  }

  set(unitKey: string, partition: number): void {
    this.known.set(unitKey, partition);
  }

  async of(unitKey: string): Promise<number | null> {
    const hit = this.known.get(unitKey);
    if (hit !== undefined) return hit;
    const row = await this.knex('units').where({ key: unitKey }).first<{ partition: number } | undefined>('partition');
    if (!row) return null;
    this.known.set(unitKey, Number(row.partition));
    return Number(row.partition);
  }
}

export interface PartitionClaimsOptions {
  databaseUrl: string;
  partitions: number;
  workerId: string;
  clientIdPrefix: string;
  mqtt: { url: string; username?: string; password?: string };
  knex: Knex;
  pipeline: IngestPipeline;
  registry: EstimatorRegistry;
  units: UnitPartitions;
  logger: Logger;
  metrics: Metrics;
  clock: Clock;
  /** A round of heartbeat, claims and releases every this many ms (default 1000). */
  everyMs?: number;
  /** A query on the worker's session slower than this counts as a lost session (default 5000). */
  sessionTimeoutMs?: number;
}

interface Held {
  partition: number;
  state: 'claiming' | 'open' | 'releasing';
  subscriber: ExternalSubscriber | null;
  /** Units known to be in the partition (at the claim, and those seen since). */
  units: Set<string>;
}

type ReleaseReason = 'rebalance' | 'shutdown' | 'lost' | 'failed';

export class PartitionClaims implements MessageSource {
  private session: pg.Client | null = null;
  private incarnation = '';
  private liveWorkers = 0;
  private readonly held = new Map<number, Held>();
  private timer: NodeJS.Timeout | null = null;
  private stopping = false;
  /** Rounds, releases and the handling of a lost session run one after another. */
  private queue: Promise<void> = Promise.resolve();
  /** The last query sent on the session (see q). */
  private inFlight: Promise<void> = Promise.resolve();
  private rounds = 0;
  private messagesOfClosed = 0;
  private warnedOutside = false;
  private lastOpenError = '';
  private lastOpenErrorAt = 0;

  constructor(private readonly o: PartitionClaimsOptions) {}

  start(): void {
    const loop = () => {
      if (this.stopping) return;
      void this.enqueue(() => this.round()).finally(() => {
        if (!this.stopping) {
          this.timer = setTimeout(loop, this.o.everyMs ?? 1000);
          this.timer.unref();
        }
      });
    };
    loop();
  }

  /** Lets go of every partition (checkpoints written), leaves the heartbeat table, closes the session. */
  async stop(): Promise<void> {
    this.stopping = true;
    if (this.timer) clearTimeout(this.timer);
    await this.enqueue(async () => {
      for (const p of [...this.held.keys()].sort((a, b) => a - b)) await this.release(p, 'shutdown');
      const session = this.session;
      if (session) {
        await this.q(session, 'delete from ingest_workers where worker_id = $1 and backend_pid = pg_backend_pid()', [this.o.workerId]).catch(() => undefined);
        this.session = null;
        await session.end().catch(() => undefined);
      }
    });
  }

  /** The partition of a unit (for the pipeline's wrong_partition check). */
  partitionOf(unitKey: string): Promise<number | null> {
    return this.o.units.of(unitKey);
  }

  claimed(): number[] {
    return [...this.held.values()].filter((h) => h.state === 'open').map((h) => h.partition).sort((a, b) => a - b);
  }

  isUp(): boolean {
    if (!this.session) return false;
    return [...this.held.values()].every((h) => h.state !== 'open' || (h.subscriber?.isUp() ?? false));
  }

  stats(): { clients: number; messagesReceived: number } {
    let clients = 0;
    let messagesReceived = this.messagesOfClosed;
    for (const h of this.held.values()) {
      const s = h.subscriber?.stats();
      if (!s) continue;
      clients += s.clients;
      messagesReceived += s.messagesReceived;
    }
    return { clients, messagesReceived };
  }

  partitions(): PartitionsReport {
    return {
      worker: this.o.workerId,
      count: this.o.partitions,
      claimed: this.claimed(),
      liveWorkers: this.session ? this.liveWorkers : 0,
      session: this.session !== null,
    };
  }

  private enqueue(fn: () => Promise<void>): Promise<void> {
    const next = this.queue.then(fn).catch((err: Error) => this.o.logger.error({ err: err.message }, 'partition claims: round failed'));
    this.queue = next;
    return next;
  }

  /**
   * One query at a time on the session: the rounds and the subscribers' reconnection checks
   * (stillHolds) share it, and a pg client takes a second query while one runs only with a
   * deprecation warning (an error in pg 9).
   */
  private q<R extends pg.QueryResultRow>(session: pg.Client, text: string, values: unknown[] = []): Promise<pg.QueryResult<R>> {
    const run = this.inFlight.then(() => session.query<R>(text, values));
    this.inFlight = run.then(
      () => undefined,
      () => undefined,
    );
    return run;
  }

  /** One round: the session, the heartbeat, the locks held, then releases or claims. */
  private async round(): Promise<void> {
    if (this.stopping) return;
    const session = this.session ?? (await this.openSession());
    if (!session) return;
    try {
      this.rounds += 1;
      const locks = await this.q<{ cls: number; key: number; mine: boolean }>(
        session,
        `select classid::bigint as cls, objid::bigint as key, pid = pg_backend_pid() as mine
           from pg_locks
          where locktype = 'advisory' and granted and objsubid = 2
            and database = (select oid from pg_database where datname = current_database())
            and classid in ($1::bigint::oid, $2::bigint::oid)`,
        [PARTITION_LOCK, WORKER_LOCK],
      );
      const mine = new Set<number>();
      const others: number[] = [];
      let live = 0;
      for (const l of locks.rows) {
        if (Number(l.cls) === WORKER_LOCK) live += 1;
        else if (l.mine) mine.add(Number(l.key));
        else others.push(Number(l.key));
      }
      this.liveWorkers = live;
      // A partition we think we hold without its lock: not ours (never expected; dropped unsaved).
      for (const p of [...this.held.keys()]) {
        if (!mine.has(p)) {
          this.o.logger.error({ partition: p }, 'partition lock not held any more: letting go of the partition without saving');
          await this.drop(p, 'lost');
        }
      }
      const plan = planClaims({
        partitions: this.o.partitions,
        liveWorkers: live,
        held: [...this.held.keys()],
        heldByOthers: others,
        start: unitPartition(this.o.workerId, this.o.partitions),
      });
      for (const p of plan.release) await this.release(p, 'rebalance');
      for (const p of plan.claim) {
        if (this.stopping || this.session !== session) break;
        const got = await this.q<{ ok: boolean }>(session, 'select pg_try_advisory_lock($1, $2) as ok', [PARTITION_LOCK, p]);
        if (got.rows[0]?.ok) await this.claim(session, p);
      }
      await this.forgetStrays();
      await this.q(
        session,
        `insert into ingest_workers (worker_id, seen_at, partitions, backend_pid, started_at)
         values ($1, now(), $2::int[], pg_backend_pid(), now())
         on conflict (worker_id) do update set seen_at = excluded.seen_at, partitions = excluded.partitions,
           backend_pid = excluded.backend_pid,
           started_at = case when ingest_workers.backend_pid = excluded.backend_pid then ingest_workers.started_at else excluded.started_at end`,
        [this.o.workerId, this.claimed()],
      );
      if (this.rounds % 600 === 1) {
        await this.q(session, `delete from ingest_workers where seen_at < now() - interval '1 day'`);
        await this.q(session, `delete from partition_claims where released_at < now() - interval '30 days'`);
      }
    } catch (err) {
      if (this.session === session) await this.lostSession(session, err as Error);
    }
  }

  private async openSession(): Promise<pg.Client | null> {
    const session = new pg.Client({
      connectionString: this.o.databaseUrl,
      application_name: `whitecap worker ${this.o.workerId}`.slice(0, 63),
      keepAlive: true,
      connectionTimeoutMillis: this.o.sessionTimeoutMs ?? 5000,
      query_timeout: this.o.sessionTimeoutMs ?? 5000,
    });
    // An error or the end of the connection is the end of every claim.
    session.on('error', (err) => this.sessionBroke(session, err));
    session.on('end', () => this.sessionBroke(session, new Error('the database session ended')));
    try {
      await session.connect();
      const pid = Number((await this.q<{ pid: number }>(session, 'select pg_backend_pid() as pid')).rows[0].pid);
      // Two live workers with one name would overwrite each other's heartbeat.
      const twin = await this.q(
        session,
        `select 1 from ingest_workers w
           join pg_locks l on l.pid = w.backend_pid and l.locktype = 'advisory' and l.granted and l.objsubid = 2
                          and l.classid = $2::bigint::oid
                          and l.database = (select oid from pg_database where datname = current_database())
          where w.worker_id = $1 and w.backend_pid <> $3`,
        [this.o.workerId, WORKER_LOCK, pid],
      );
      if (twin.rowCount) throw new Error(`another live worker is named ${this.o.workerId}: give each worker its own WHITECAP_WORKER_ID`);
      const presence = await this.q<{ ok: boolean }>(session, 'select pg_try_advisory_lock($1, $2) as ok', [WORKER_LOCK, pid]);
      if (!presence.rows[0]?.ok) throw new Error('could not take the worker presence lock');
      if (!this.warnedOutside) {
        const outside = await this.q<{ n: number }>(session, 'select count(*)::int as n from units where partition >= $1', [this.o.partitions]);
        if (outside.rows[0].n > 0) {
          this.warnedOutside = true;
          this.o.logger.error(
            { units: outside.rows[0].n, partitions: this.o.partitions },
            'units are provisioned in partitions beyond WHITECAP_PARTITIONS: no worker takes their messages',
          );
        }
      }
      this.incarnation = randomUUID();
      this.session = session;
      this.o.logger.info({ worker: this.o.workerId, backendPid: pid }, 'partition claims: database session open');
      return session;
    } catch (err) {
      // Once a second while the database is away: said when it changes, or every 30 s.
      const message = (err as Error).message;
      const now = Date.now();
      if (message !== this.lastOpenError || now - this.lastOpenErrorAt > 30_000) {
        this.lastOpenError = message;
        this.lastOpenErrorAt = now;
        this.o.logger.error({ err: message }, 'partition claims: could not open the database session');
      }
      session.removeAllListeners('end');
      session.on('error', () => undefined);
      await session.end().catch(() => undefined);
      return null;
    }
  }

  /** From the connection's events: stop taking messages at once, then forget everything in turn. */
  private sessionBroke(session: pg.Client, err: Error): void {
    if (this.session !== session) return;
    for (const h of this.held.values()) void h.subscriber?.destroy();
    void this.enqueue(() => this.lostSession(session, err));
  }

  private async lostSession(session: pg.Client, err: Error): Promise<void> {
    if (this.session !== session) return;
    this.session = null;
    this.liveWorkers = 0;
    session.removeAllListeners('end');
    session.on('error', () => undefined);
    void session.end().catch(() => undefined);
    this.o.logger.error({ err: err.message, partitions: [...this.held.keys()] }, 'lost the database session: every partition claim is gone');
    for (const p of [...this.held.keys()]) await this.drop(p, 'lost');
  }

  private async claim(session: pg.Client, p: number): Promise<void> {
    const h: Held = { partition: p, state: 'claiming', subscriber: null, units: new Set() };
    this.held.set(p, h);
    try {
      // A claim left open was its holder's when it died: it ends now.
      await this.q(
        session,
        `update partition_claims set released_at = clock_timestamp(), release_reason = 'holder gone'
          where partition = $1 and released_at is null and incarnation <> $2`,
        [p, this.incarnation],
      );
      await this.q(
        session,
        'insert into partition_claims (partition, worker_id, incarnation, claimed_at) values ($1, $2, $3, clock_timestamp())',
        [p, this.o.workerId, this.incarnation],
      );
      await this.prepare(h);
      if (this.session !== session || this.stopping) throw new Error('the claim ended while it was being taken');
      h.subscriber = startExternalSubscriber({
        ...this.o.mqtt,
        clientId: partitionClientId(this.o.clientIdPrefix, p),
        filter: partitionFilter(p),
        parse: parsePartitionedInnovationsTopic,
        logger: this.o.logger,
        logContext: { partition: p },
        handle: (unit, estimator, topic, payload) => {
          h.units.add(unit);
          return this.o.pipeline.handle(unit, estimator, topic, payload);
        },
        mayReconnect: () => this.stillHolds(p),
        onGone: () => void this.enqueue(() => this.drop(p, 'lost')),
      });
      h.state = 'open';
      this.o.metrics.partitionsClaimed.set(this.claimed().length);
      this.o.logger.info({ partition: p, worker: this.o.workerId, units: h.units.size }, 'claimed partition');
    } catch (err) {
      this.o.logger.error({ partition: p, err: (err as Error).message }, 'could not take up the partition');
      await this.drop(p, 'failed');
      if (this.session === session) {
        await this.q(
          session,
          `update partition_claims set released_at = clock_timestamp(), release_reason = 'failed'
            where partition = $1 and incarnation = $2 and released_at is null`,
          [p, this.incarnation],
        ).catch(() => undefined);
        await this.q(session, 'select pg_advisory_unlock($1, $2)', [PARTITION_LOCK, p]).catch(() => undefined);
      }
    }
  }

  /**
   * What a restart does for the whole fleet, for one partition: the checks of estimators
   * heard from before are loaded (so their silence is noticed) and live alerts adopted
   * (so they clear in time). Both come from the checkpoints the last holder committed.
   */
  private async prepare(h: Held): Promise<void> {
    const { knex, registry, pipeline } = this.o;
    const rows = await knex('estimators as e')
      .join('units as u', 'u.id', 'e.unit_id')
      .where('u.partition', h.partition)
      .select<{ unit_key: string; key: string }[]>('u.key as unit_key', 'e.key');
    const unitKeys = await knex('units').where({ partition: h.partition }).pluck('key');
    for (const k of unitKeys as string[]) {
      h.units.add(k);
      this.o.units.set(k, h.partition);
    }
    const now = this.o.clock.now();
    const infos = (await Promise.all(rows.map((r) => registry.find(r.unit_key, r.key, now)))).filter((i): i is EstimatorInfo => !!i);
    const byId = new Map(infos.map((i) => [i.id, i]));
    const ofPartition = knex('estimators as e').join('units as u', 'u.id', 'e.unit_id').where('u.partition', h.partition).select('e.id');
    const live = await knex('alerts').whereNot({ state: 'resolved' }).whereIn('estimator_id', ofPartition.clone()).select('estimator_id', 'rule', 'opened_at');
    const seen = await knex('estimator_status').whereNotNull('last_received_at').whereIn('estimator_id', ofPartition.clone()).pluck('estimator_id');
    // Together, so the checkpoints are read in one query.
    await Promise.all([
      ...live.map((a) => {
        const info = byId.get(Number(a.estimator_id));
        return info ? pipeline.adoptLiveAlert(info, a.rule as RuleName, new Date(a.opened_at).getTime()) : undefined;
      }),
      ...(seen as number[]).map((id) => {
        const info = byId.get(Number(id));
        return info ? pipeline.watch(info) : undefined;
      }),
    ]);
  }

  private async stillHolds(p: number): Promise<boolean> {
    const session = this.session;
    if (!session || this.held.get(p)?.state !== 'open') return false;
    const r = await this.q<{ held: boolean }>(
      session,
      `select exists (select 1 from pg_locks where locktype = 'advisory' and granted and objsubid = 2 and pid = pg_backend_pid()
                        and classid = $1::bigint::oid and objid = $2::bigint::oid) as held`,
      [PARTITION_LOCK, p],
    );
    return r.rows[0]?.held === true;
  }

  /** Lets go of a partition in order: connection, checks (saved), claim record, lock. */
  private async release(p: number, reason: ReleaseReason): Promise<void> {
    const h = this.held.get(p);
    const session = this.session;
    if (!h) return;
    if (!session) return this.drop(p, 'lost');
    h.state = 'releasing';
    this.o.metrics.partitionsClaimed.set(this.claimed().length);
    if (h.subscriber) {
      await h.subscriber.close();
      this.messagesOfClosed += h.subscriber.stats().messagesReceived;
    }
    let saved = 0;
    try {
      saved = await this.o.pipeline.release(this.unitsOf(h), true);
    } catch (err) {
      this.o.logger.error({ partition: p, err: (err as Error).message }, 'checkpoints of a released partition could not be written; its next holder resumes from older ones');
      await this.o.pipeline.release(this.unitsOf(h), false);
    }
    this.held.delete(p);
    this.o.metrics.partitionReleases.inc({ reason });
    try {
      await this.q(
        session,
        `update partition_claims set released_at = clock_timestamp(), release_reason = $3
          where partition = $1 and incarnation = $2 and released_at is null`,
        [p, this.incarnation, reason],
      );
      await this.q(session, 'select pg_advisory_unlock($1, $2)', [PARTITION_LOCK, p]);
    } catch (err) {
      if (this.session === session) await this.lostSession(session, err as Error);
    }
    this.o.logger.info({ partition: p, worker: this.o.workerId, reason, estimatorsSaved: saved }, 'released partition');
  }

  /** Lets go of a partition that is not (or may not be) ours any more: nothing is written. */
  private async drop(p: number, reason: ReleaseReason): Promise<void> {
    const h = this.held.get(p);
    if (!h) return;
    this.held.delete(p);
    if (h.subscriber) {
      await h.subscriber.destroy();
      // The message in hand may still be loading its estimator's checks: let it settle (bounded) first.
      await Promise.race([h.subscriber.idle(), new Promise((r) => setTimeout(r, 5000).unref())]);
      this.messagesOfClosed += h.subscriber.stats().messagesReceived;
    }
    const forgotten = await this.o.pipeline.release(this.unitsOf(h), false);
    this.o.metrics.partitionsClaimed.set(this.claimed().length);
    this.o.metrics.partitionReleases.inc({ reason });
    this.o.logger.warn({ partition: p, worker: this.o.workerId, reason, estimatorsForgotten: forgotten }, 'let go of partition without saving');
  }

  private unitsOf(h: Held): Set<string> {
    const units = new Set(h.units);
    for (const k of this.o.pipeline.streamUnitKeys()) if (this.o.units.get(k) === h.partition) units.add(k);
    return units;
  }

  /** Checks in memory for a unit of a partition not held (a message that was in hand when it was dropped): forgotten. */
  private async forgetStrays(): Promise<void> {
    const strays = new Set<string>();
    for (const k of this.o.pipeline.streamUnitKeys()) {
      const p = this.o.units.get(k);
      if (p !== undefined && !this.held.has(p)) strays.add(k);
    }
    if (strays.size === 0) return;
    this.o.logger.warn({ units: [...strays] }, 'checks in memory for units of partitions not held: forgotten');
    await this.o.pipeline.release(strays, false);
  }
}
