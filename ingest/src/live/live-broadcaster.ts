// One live stream fanned out to every dashboard: each change is turned into its
// server-sent-event frame once, and frames are handed to the connections together every
// `flushMs` (one write per connection per flush) rather than one write per change per
// connection. At the design load (10,000 estimators, verdicts changing hundreds of times a
// second) and 50 dashboards, that is a few hundred writes a second instead of tens of
// thousands.
import type { AlertChange, VerdictChange } from '../../../shared/src/api/api-types';
import type { AlertEvent, ServiceEvents, VerdictEvent } from '../events';

/** A connection's writer: returns false when its buffer is full (the client reads slowly). */
export interface LiveClient {
  write(chunk: string): boolean;
}

export interface LiveBroadcasterOptions {
  /** How long changes are gathered before they are written (default 250 ms). */
  flushMs?: number;
  /** A comment line to every connection when nothing else was written for this long (default 15 s). */
  keepAliveMs?: number;
  /** A connection whose unread frames pass this many bytes gets only the newest from then on (default 4 MB). */
  maxBacklogBytes?: number;
}

export function sseFrame(event: string, data: unknown): string {
  return `event: ${event}\ndata: ${JSON.stringify(data)}\n\n`;
}

export function verdictFrame(e: VerdictEvent): string {
  return sseFrame('verdict', {
    estimatorId: e.estimatorId,
    verdict: e.verdict,
    previous: e.previous,
    at: new Date(e.atMs).toISOString(),
  } satisfies VerdictChange);
}

export function alertFrame(e: AlertEvent): string {
  return sseFrame('alert', {
    alertId: e.alertId ?? null,
    kind: e.kind,
    estimatorId: e.estimatorId,
    rule: e.rule,
    severity: e.severity as AlertChange['severity'],
    summary: e.summary,
    at: new Date(e.atMs).toISOString(),
  } satisfies AlertChange);
}

export class LiveBroadcaster {
  private readonly clients = new Map<LiveClient, { lastWriteMs: number; slow: boolean }>();
  private pending: string[] = [];
  private timer: NodeJS.Timeout | null = null;
  private keepAliveTimer: NodeJS.Timeout | null = null;
  private readonly flushMs: number;
  private readonly keepAliveMs: number;
  private readonly onVerdict = (e: VerdictEvent) => this.push(verdictFrame(e));
  private readonly onAlert = (e: AlertEvent) => this.push(alertFrame(e));
  /** Frames written and writes made, for tests and metrics. */
  readonly counts = { frames: 0, writes: 0 };

  constructor(
    private readonly events: ServiceEvents,
    options: LiveBroadcasterOptions = {},
  ) {
    this.flushMs = options.flushMs ?? 250;
    this.keepAliveMs = options.keepAliveMs ?? 15_000;
  }

  /** Adds a connection; returns the function that removes it. */
  add(client: LiveClient): () => void {
    if (this.clients.size === 0) {
      this.events.on('verdict', this.onVerdict);
      this.events.on('alert', this.onAlert);
      this.keepAliveTimer = setInterval(() => this.keepAlive(), Math.min(this.keepAliveMs, 5000));
      this.keepAliveTimer.unref();
    }
    this.clients.set(client, { lastWriteMs: Date.now(), slow: false });
    return () => this.remove(client);
  }

  get size(): number {
    return this.clients.size;
  }

  private remove(client: LiveClient): void {
    if (!this.clients.delete(client) || this.clients.size > 0) return;
    this.events.off('verdict', this.onVerdict);
    this.events.off('alert', this.onAlert);
    if (this.keepAliveTimer) clearInterval(this.keepAliveTimer);
    if (this.timer) clearTimeout(this.timer);
    this.keepAliveTimer = null;
    this.timer = null;
    this.pending = [];
  }

  private push(frame: string): void {
    this.pending.push(frame);
    this.counts.frames += 1;
    this.timer ??= setTimeout(() => this.flush(), this.flushMs);
  }

  /** Writes what was gathered to every connection, once each. */
  flush(): void {
    if (this.timer) clearTimeout(this.timer);
    this.timer = null;
    if (this.pending.length === 0) return;
    const chunk = this.pending.join('');
    this.pending = [];
    const now = Date.now();
    for (const [client, state] of this.clients) {
      // A client that does not read keeps its socket buffer full: Node would queue without
      // bound. Skip it until it drains (the dashboard refetches the table anyway).
      if (state.slow && (client as { writableNeedDrain?: boolean }).writableNeedDrain) continue;
      state.slow = !client.write(chunk);
      state.lastWriteMs = now;
      this.counts.writes += 1;
    }
  }

  private keepAlive(): void {
    const now = Date.now();
    for (const [client, state] of this.clients) {
      if (now - state.lastWriteMs < this.keepAliveMs) continue;
      client.write(': keep-alive\n\n');
      state.lastWriteMs = now;
    }
  }
}
