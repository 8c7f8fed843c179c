// Whether the parts the service depends on are up: the database and the broker.
import type { Knex } from 'knex';

/** The embedded broker, or the connection to an external one. */
export interface MessageSource {
  isUp(): boolean;
  stats(): { clients: number; messagesReceived: number };
}

export interface HealthReport {
  status: 'ok' | 'degraded';
  time: string;
  uptimeSeconds: number;
  database: { up: boolean; latencyMs?: number; error?: string };
  broker: { up: boolean; clients?: number; messagesReceived?: number; error?: string };
  pipeline?: { writeQueueSamples: number; writesFailing: boolean; estimatorsStreaming: number };
}

export class HealthService {
  private readonly startedAt = Date.now();

  constructor(
    private readonly knex: Knex,
    private readonly broker: () => MessageSource | null,
    private readonly timeoutMs: number,
    private readonly pipeline?: () => NonNullable<HealthReport['pipeline']>,
  ) {}

  async report(): Promise<HealthReport> {
    const [database] = await Promise.all([this.checkDatabase()]);
    const b = this.broker();
    const broker = b
      ? b.isUp()
        ? { up: true, ...b.stats() }
        : { up: false, error: 'broker is not listening' }
      : { up: false, error: 'broker not started' };
    return {
      status: database.up && broker.up ? 'ok' : 'degraded',
      time: new Date().toISOString(),
      uptimeSeconds: Math.round((Date.now() - this.startedAt) / 1000),
      database,
      broker,
      ...(this.pipeline ? { pipeline: this.pipeline() } : {}),
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
