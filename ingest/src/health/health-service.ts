// Whether the parts the service depends on are up: the database (and the service's writes
// to it) and the broker.
import type { Knex } from 'knex';
import { systemClock, type Clock } from '../clock';

/** The embedded broker, or the connection to an external one. */
export interface MessageSource {
  isUp(): boolean;
  stats(): { clients: number; messagesReceived: number };
  /** Partitioned workers: which partitions this worker holds. */
  partitions?(): PartitionsReport;
}

export interface PartitionsReport {
  worker: string;
  /** Partitions of the fleet, and those this worker holds now. */
  count: number;
  claimed: number[];
  /** Workers alive (holding a database session), this one included; 0 while this one has no session. */
  liveWorkers: number;
  /** Whether this worker has its database session (it holds nothing without one). */
  session: boolean;
}

export interface HealthReport {
  status: 'ok' | 'degraded';
  time: string;
  uptimeSeconds: number;
  database: { up: boolean; latencyMs?: number; error?: string };
  broker: { up: boolean; clients?: number; messagesReceived?: number; error?: string };
  pipeline?: { writeQueueSamples: number; writesFailing: boolean; estimatorsStreaming: number };
  partitions?: PartitionsReport;
}

export class HealthService {
  /** Uptime is a duration: measured on the monotonic clock, not the service's (movable) one. */
  private readonly startedAt = performance.now();

  constructor(
    private readonly knex: Knex,
    private readonly broker: () => MessageSource | null,
    private readonly timeoutMs: number,
    private readonly pipeline?: () => NonNullable<HealthReport['pipeline']>,
    private readonly clock: Clock = systemClock,
  ) {}

  async report(): Promise<HealthReport> {
    const [database] = await Promise.all([this.checkDatabase()]);
    const b = this.broker();
    const broker = b
      ? b.isUp()
        ? { up: true, ...b.stats() }
        : { up: false, error: 'broker is not listening' }
      : { up: false, error: 'broker not started' };
    const pipeline = this.pipeline?.();
    // Writes failing (the database refusing them, or back from an outage and not yet
    // taking them) means samples are not being stored: not healthy, whatever `select 1` says.
    return {
      status: database.up && broker.up && !pipeline?.writesFailing ? 'ok' : 'degraded',
      time: new Date(this.clock.now()).toISOString(),
      uptimeSeconds: Math.round((performance.now() - this.startedAt) / 1000),
      database,
      broker,
      ...(pipeline ? { pipeline } : {}),
      ...(b?.partitions ? { partitions: b.partitions() } : {}),
    };
  }

  private async checkDatabase(): Promise<HealthReport['database']> {
    const started = performance.now();
    let timer: NodeJS.Timeout | undefined;
    try {
      await Promise.race([
        this.knex.raw('select 1'),
        new Promise((_, reject) => {
          timer = setTimeout(() => reject(new Error(`no answer within ${this.timeoutMs} ms`)), this.timeoutMs);
        }),
      ]);
      return { up: true, latencyMs: Math.round((performance.now() - started) * 10) / 10 };
    } catch (err) {
      return { up: false, error: (err as Error).message };
    } finally {
      clearTimeout(timer);
    }
  }
}
