import { firstValueFrom, take, toArray } from 'rxjs';
import { eventStream, type LiveStatus, type StreamResponse } from './event-stream';
import { toServerEvent } from './live-events';

/** A response whose body yields the given text chunks, then ends (or hangs open). */
function response(chunks: string[], options: { status?: number; hang?: boolean } = {}): StreamResponse & { cancelled: boolean } {
  const encoder = new TextEncoder();
  const queue = chunks.map((c) => encoder.encode(c));
  const res = {
    ok: (options.status ?? 200) < 300,
    status: options.status ?? 200,
    cancelled: false,
    body: {
      getReader: () => ({
        read: () =>
          queue.length
            ? Promise.resolve({ done: false, value: queue.shift() })
            : options.hang
              ? new Promise<{ done: boolean }>(() => undefined)
              : Promise.resolve({ done: true }),
        cancel: async () => {
          res.cancelled = true;
        },
      }),
    },
  };
  return res;
}

describe('eventStream', () => {
  it('emits the parsed events of one connection', async () => {
    const stream = eventStream(async () => response(['event: verdict\ndata: {"estimatorId":1,"verdict":"silent"}\n\n'], { hang: true }));
    const [message] = await firstValueFrom(stream.pipe(take(1), toArray()));
    expect(toServerEvent(message)).toEqual({ type: 'verdict', data: { estimatorId: 1, verdict: 'silent' } });
  });

  it('reconnects with growing waits after the stream ends or the connect fails, and carries on emitting', async () => {
    const connectedAt: number[] = [];
    const statuses: LiveStatus[] = [];
    let calls = 0;
    const stream = eventStream(
      async () => {
        connectedAt.push(Date.now());
        calls++;
        if (calls === 1) return response(['event: alert\ndata: {"alertId":1}\n\n']);
        if (calls === 2) throw new TypeError('network down');
        if (calls === 3) return response([], { status: 503 });
        return response(['event: alert\ndata: {"alertId":2}\n\n'], { hang: true });
      },
      { initialDelayMs: 10, maxDelayMs: 1000, random: () => 0.999, onStatus: (s) => statuses.push(s) },
    );
    const messages = await firstValueFrom(stream.pipe(take(2), toArray()));
    expect(messages.map((m) => JSON.parse(m.data).alertId)).toEqual([1, 2]);
    expect(calls).toBe(4);
    // Waits of about 10, 20 and 40 ms: the backoff doubles per failure in a row.
    const waits = connectedAt.slice(1).map((t, i) => t - connectedAt[i]);
    expect(waits[0]).toBeGreaterThanOrEqual(8);
    expect(waits[2]).toBeGreaterThanOrEqual(30);
    expect(statuses).toContain('retrying');
    expect(statuses.at(-1)).toBe('open');
  });

  it('refreshes the session once on a 401 and reconnects at once', async () => {
    let calls = 0;
    const onUnauthorized = jest.fn(async () => true);
    const stream = eventStream(
      async () => (++calls === 1 ? response([], { status: 401 }) : response(['event: verdict\ndata: {}\n\n'], { hang: true })),
      { initialDelayMs: 5_000, onUnauthorized },
    );
    await firstValueFrom(stream);
    expect(onUnauthorized).toHaveBeenCalledTimes(1);
    expect(calls).toBe(2);
  });

  it('aborts the request and stops reconnecting when its subscriber leaves', async () => {
    let signal: AbortSignal | undefined;
    let calls = 0;
    const res = response([], { hang: true });
    const stream = eventStream(async (s) => {
      calls++;
      signal = s;
      return res;
    });
    const subscription = stream.subscribe();
    await new Promise((r) => setTimeout(r, 5));
    subscription.unsubscribe();
    expect(signal?.aborted).toBe(true);
    await new Promise((r) => setTimeout(r, 20));
    expect(calls).toBe(1);
  });

  it('ignores events of unknown types and data that is not JSON', () => {
    expect(toServerEvent({ event: 'message', data: '{}', id: null })).toBeNull();
    expect(toServerEvent({ event: 'alert', data: 'not json', id: null })).toBeNull();
  });
});
