import { Observable } from 'rxjs';
import { SseParser, type SseMessage } from './sse-parser';

/** The parts of a fetch() Response the stream reads (so tests can hand in their own). */
export interface StreamResponse {
  ok: boolean;
  status: number;
  body: { getReader(): StreamReader } | null;
}
export interface StreamReader {
  read(): Promise<{ done: boolean; value?: Uint8Array }>;
  cancel(): Promise<void>;
}

export type LiveStatus = 'connecting' | 'open' | 'retrying';

export interface EventStreamOptions {
  /** First wait before reconnecting; doubles per failed attempt up to `maxDelayMs`. */
  initialDelayMs?: number;
  maxDelayMs?: number;
  onStatus?: (status: LiveStatus) => void;
  /** On a 401: refresh the session; resolving true reconnects at once (once per failure run). */
  onUnauthorized?: () => Promise<boolean>;
  /** For the jitter, in [0, 1). */
  random?: () => number;
}

/**
 * A server-sent events stream read with fetch() streaming (so it can carry a bearer
 * token, which EventSource cannot). It reconnects by itself with exponential backoff
 * and jitter after errors and ends (aborting the request) when its subscriber leaves.
 */
export function eventStream(connect: (signal: AbortSignal) => Promise<StreamResponse>, options: EventStreamOptions = {}): Observable<SseMessage> {
  const initialDelayMs = options.initialDelayMs ?? 1000;
  const maxDelayMs = options.maxDelayMs ?? 30_000;
  const random = options.random ?? Math.random;

  return new Observable<SseMessage>((subscriber) => {
    let closed = false;
    let controller: AbortController | null = null;
    let wake: (() => void) | null = null;
    let sleepTimer: ReturnType<typeof setTimeout> | undefined;

    const sleep = (ms: number) =>
      new Promise<void>((resolve) => {
        wake = resolve;
        sleepTimer = setTimeout(resolve, ms);
      });

    const run = async () => {
      let failures = 0;
      let refreshed = false;
      let serverRetryMs: number | null = null;
      while (!closed) {
        options.onStatus?.(failures === 0 ? 'connecting' : 'retrying');
        controller = new AbortController();
        try {
          const res = await connect(controller.signal);
          if (closed) break;
          if (res.status === 401 && options.onUnauthorized && !refreshed) {
            refreshed = true;
            if (await options.onUnauthorized()) continue;
          }
          if (!res.ok || !res.body) throw new Error(`event stream answered ${res.status}`);
          refreshed = false;
          failures = 0;
          options.onStatus?.('open');
          const reader = res.body.getReader();
          const parser = new SseParser();
          const decoder = new TextDecoder();
          try {
            while (!closed) {
              const { done, value } = await reader.read();
              if (done || closed) break;
              for (const message of parser.push(decoder.decode(value, { stream: true }))) subscriber.next(message);
              serverRetryMs = parser.retryMs ?? serverRetryMs;
            }
          } finally {
            if (closed) void reader.cancel().catch(() => undefined);
          }
        } catch {
          /* a failed connect or a broken stream: wait, then reconnect */
        }
        if (closed) break;
        const base = serverRetryMs ?? initialDelayMs;
        const delay = Math.min(maxDelayMs, base * 2 ** failures) * (0.5 + random() / 2);
        failures++;
        options.onStatus?.('retrying');
        await sleep(delay);
      }
    };
    void run();

    return () => {
      closed = true;
      controller?.abort();
      clearTimeout(sleepTimer);
      wake?.();
    };
  });
}
