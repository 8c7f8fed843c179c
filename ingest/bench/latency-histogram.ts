// A log-bucketed latency histogram (about 1 % resolution from 10 µs to hours) that
// publisher processes fill and the benchmark merges: percentiles of the whole fleet
// without keeping every latency.

/** Bucket i holds latencies in [BASE·G^i, BASE·G^(i+1)) milliseconds. */
const BASE_MS = 0.01;
const G = 1.01;
const LOG_G = Math.log(G);

export interface HistogramData {
  /** Sparse counts: bucket index → count. */
  buckets: Record<number, number>;
  count: number;
  sumMs: number;
  maxMs: number;
  minMs: number;
}

export class LatencyHistogram {
  private readonly counts = new Map<number, number>();
  count = 0;
  sumMs = 0;
  maxMs = 0;
  minMs = Infinity;

  record(ms: number): void {
    const v = ms < BASE_MS ? BASE_MS : ms;
    const i = Math.floor(Math.log(v / BASE_MS) / LOG_G);
    this.counts.set(i, (this.counts.get(i) ?? 0) + 1);
    this.count += 1;
    this.sumMs += ms;
    if (ms > this.maxMs) this.maxMs = ms;
    if (ms < this.minMs) this.minMs = ms;
  }

  merge(data: HistogramData): void {
    for (const [k, n] of Object.entries(data.buckets)) {
      const i = Number(k);
      this.counts.set(i, (this.counts.get(i) ?? 0) + n);
    }
    this.count += data.count;
    this.sumMs += data.sumMs;
    this.maxMs = Math.max(this.maxMs, data.maxMs);
    this.minMs = Math.min(this.minMs, data.minMs);
  }

  toJSON(): HistogramData {
    return { buckets: Object.fromEntries(this.counts), count: this.count, sumMs: this.sumMs, maxMs: this.maxMs, minMs: this.minMs };
  }

  /** The latency below which a fraction q of the recorded values lie (bucket midpoint, ≈1 %). */
  quantile(q: number): number | null {
    if (this.count === 0) return null;
    const target = Math.max(1, Math.ceil(q * this.count));
    const keys = [...this.counts.keys()].sort((a, b) => a - b);
    let seen = 0;
    for (const i of keys) {
      seen += this.counts.get(i)!;
      if (seen >= target) return Math.min(this.maxMs, BASE_MS * Math.pow(G, i + 0.5));
    }
    return this.maxMs;
  }

  summary(): { count: number; meanMs: number | null; p50Ms: number | null; p90Ms: number | null; p99Ms: number | null; p999Ms: number | null; maxMs: number | null } {
    return {
      count: this.count,
      meanMs: this.count ? this.sumMs / this.count : null,
      p50Ms: this.quantile(0.5),
      p90Ms: this.quantile(0.9),
      p99Ms: this.quantile(0.99),
      p999Ms: this.quantile(0.999),
      maxMs: this.count ? this.maxMs : null,
    };
  }
}
