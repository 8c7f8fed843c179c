// Small helpers for tests that watch a running service: polling for a condition, the
// service's resident memory, its Prometheus metrics and its health report.
import fs from 'node:fs';

export const sleep = (ms: number) => new Promise<void>((r) => setTimeout(r, ms));

/** Polls until `probe` gives a truthy value and returns it; throws after timeoutMs. */
export async function waitFor<T>(
  what: string,
  probe: () => Promise<T | null | undefined | false> | T | null | undefined | false,
  timeoutMs = 20_000,
  everyMs = 100,
): Promise<NonNullable<Exclude<T, false>>> {
  const deadline = Date.now() + timeoutMs;
  let last: unknown;
  while (Date.now() < deadline) {
    try {
      const v = await probe();
      if (v) return v as NonNullable<Exclude<T, false>>;
    } catch (err) {
      last = err;
    }
    await sleep(everyMs);
  }
  throw new Error(`timed out after ${timeoutMs} ms waiting for ${what}${last ? ` (last error: ${(last as Error).message})` : ''}`);
}

/** Resident set size of a process in MB (Linux /proc), or NaN when it is gone. */
export function rssMb(pid: number | undefined): number {
  if (!pid) return NaN;
  try {
    const status = fs.readFileSync(`/proc/${pid}/status`, 'utf8');
    const kb = /^VmRSS:\s+(\d+)\s+kB/m.exec(status);
    return kb ? Number(kb[1]) / 1024 : NaN;
  } catch {
    return NaN;
  }
}

/** One unlabelled sample of a Prometheus text exposition (NaN when absent). */
export function metricValue(text: string, name: string): number {
  const line = text.split('\n').find((l) => l.startsWith(`${name} `));
  return line ? Number(line.slice(name.length + 1)) : NaN;
}

/** The sum of every labelled sample of a metric (e.g. a counter by reason). */
export function metricSum(text: string, name: string): number {
  let sum = 0;
  for (const l of text.split('\n')) {
    if (l.startsWith(`${name}{`) || l.startsWith(`${name} `)) sum += Number(l.slice(l.lastIndexOf(' ') + 1));
  }
  return sum;
}

export async function metrics(url: string): Promise<string> {
  return (await fetch(`${url}/metrics`, { signal: AbortSignal.timeout(10_000) })).text();
}

export interface HealthAnswer {
  status: number;
  body: {
    status: string;
    time: string;
    database: { up: boolean; error?: string };
    broker: { up: boolean; error?: string };
    pipeline?: { writeQueueSamples: number; writesFailing: boolean; estimatorsStreaming: number };
  };
}

export async function health(url: string): Promise<HealthAnswer> {
  const res = await fetch(`${url}/api/health`, { signal: AbortSignal.timeout(10_000) });
  return { status: res.status, body: await res.json() };
}

/**
 * Samples a value every `everyMs` until stopped, keeping every reading: for bounds that
 * must hold throughout (memory, queue depth), not only at the moments a test looks.
 */
export function sampleEvery<T>(everyMs: number, read: () => Promise<T> | T): { readings: { at: number; value: T }[]; stop(): Promise<void> } {
  const readings: { at: number; value: T }[] = [];
  let stopped = false;
  const loop = (async () => {
    while (!stopped) {
      try {
        readings.push({ at: Date.now(), value: await read() });
      } catch {
        /* a missed reading */
      }
      await sleep(everyMs);
    }
  })();
  return {
    readings,
    async stop() {
      stopped = true;
      await loop;
    },
  };
}
