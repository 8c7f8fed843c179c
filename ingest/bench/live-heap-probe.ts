/**
 * What the service really keeps: a full garbage collection through the V8 inspector,
 * then the process's own memory figures. A heap sampled between collections saws up and
 * down by hundreds of MB and rises as V8 lets its old generation grow towards its
 * limit; the heap right after a full collection is what is live, and it grows only when
 * something is kept that should not be.
 *
 * The service must run with `--inspect=127.0.0.1:PORT` (bench only: the inspector
 * would let anyone on loopback run code in the process). Each probe stops the service
 * for one full mark-compact, so latency figures taken while probing are a little worse.
 */
import WebSocket from 'ws';

export interface LiveHeap {
  /** V8 heap in use right after a full collection. */
  heapUsedMB: number;
  /** Memory of C++ objects bound to JS objects (Buffers included). */
  externalMB: number;
  arrayBuffersMB: number;
  rssMB: number;
  /** How long the forced collection and the read took, as the service's pause. */
  pauseMs: number;
}

const MB = 1024 * 1024;

export class LiveHeapProbe {
  private nextId = 1;
  private readonly pending = new Map<number, { resolve: (v: unknown) => void; reject: (e: Error) => void }>();

  private constructor(private readonly socket: WebSocket) {
    socket.on('message', (data) => {
      const m = JSON.parse(String(data)) as { id?: number; result?: unknown; error?: { message: string } };
      if (m.id === undefined) return;
      const p = this.pending.get(m.id);
      if (!p) return;
      this.pending.delete(m.id);
      if (m.error) p.reject(new Error(m.error.message));
      else p.resolve(m.result);
    });
    socket.on('close', () => {
      for (const p of this.pending.values()) p.reject(new Error('the inspector connection closed'));
      this.pending.clear();
    });
  }

  /** Connects to the inspector listening on 127.0.0.1:port (waits up to 10 s for it). */
  static async connect(port: number): Promise<LiveHeapProbe> {
    const deadline = Date.now() + 10_000;
    let url: string | undefined;
    while (!url) {
      try {
        const list = (await (await fetch(`http://127.0.0.1:${port}/json/list`)).json()) as { webSocketDebuggerUrl?: string }[];
        url = list[0]?.webSocketDebuggerUrl;
      } catch {
        /* not listening yet */
      }
      if (!url) {
        if (Date.now() > deadline) throw new Error(`no inspector on 127.0.0.1:${port}`);
        await new Promise((r) => setTimeout(r, 200));
      }
    }
    const socket = new WebSocket(url, { perMessageDeflate: false });
    await new Promise<void>((resolve, reject) => {
      socket.once('open', () => resolve());
      socket.once('error', reject);
    });
    return new LiveHeapProbe(socket);
  }

  private call(method: string, params: Record<string, unknown> = {}): Promise<unknown> {
    const id = this.nextId++;
    return new Promise((resolve, reject) => {
      this.pending.set(id, { resolve, reject });
      this.socket.send(JSON.stringify({ id, method, params }), (err) => {
        if (err) {
          this.pending.delete(id);
          reject(err);
        }
      });
    });
  }

  /** One full collection, then process.memoryUsage() read inside the service. */
  async measure(): Promise<LiveHeap> {
    const started = Date.now();
    await this.call('HeapProfiler.collectGarbage');
    const r = (await this.call('Runtime.evaluate', {
      expression: 'JSON.stringify(process.memoryUsage())',
      returnByValue: true,
    })) as { result: { value: string } };
    const pauseMs = Date.now() - started;
    const m = JSON.parse(r.result.value) as NodeJS.MemoryUsage;
    return {
      heapUsedMB: Math.round((m.heapUsed / MB) * 10) / 10,
      externalMB: Math.round((m.external / MB) * 10) / 10,
      arrayBuffersMB: Math.round((m.arrayBuffers / MB) * 10) / 10,
      rssMB: Math.round((m.rss / MB) * 10) / 10,
      pauseMs,
    };
  }

  close(): void {
    this.socket.close();
  }
}
