// Token buckets per key (a unit's samples, a client id's connects): each key may spend
// `ratePerSecond` tokens per second on average and up to `burst` at once. Pure: the
// caller passes the time, so the buckets can be tested without waiting.
//
// A bucket starts full, refills continuously at `ratePerSecond` up to `burst`, and a
// take is all or nothing: a request for more tokens than the bucket holds takes none
// (a refused message costs nothing, so a unit that slows down gets through again at
// once). Memory stays bounded whoever picks the keys: a bucket that has refilled to
// `burst` is the same as no bucket, so once more than `maxKeys` are held the full ones
// are forgotten, and if that is not enough the least recently used ones are.

export interface TokenBucketSettings {
  /** Tokens added per second (the sustained rate). */
  ratePerSecond: number;
  /** Tokens a bucket holds at most (the burst allowed after a quiet spell). */
  burst: number;
  /** Keys remembered before full or old buckets are forgotten (default 10,000). */
  maxKeys?: number;
}

interface Bucket {
  tokens: number;
  atMs: number;
}

export class TokenBuckets {
  private readonly buckets = new Map<string, Bucket>();
  private readonly ratePerMs: number;
  private readonly burst: number;
  private readonly maxKeys: number;

  constructor(settings: TokenBucketSettings) {
    const { ratePerSecond, burst, maxKeys = 10_000 } = settings;
    if (!(ratePerSecond > 0) || !Number.isFinite(ratePerSecond)) throw new RangeError(`ratePerSecond must be a positive number, got ${ratePerSecond}`);
    if (!(burst >= 1) || !Number.isFinite(burst)) throw new RangeError(`burst must be at least 1, got ${burst}`);
    if (!Number.isInteger(maxKeys) || maxKeys < 1) throw new RangeError(`maxKeys must be a positive integer, got ${maxKeys}`);
    this.ratePerMs = ratePerSecond / 1000;
    this.burst = burst;
    this.maxKeys = maxKeys;
  }

  /** Tokens `key` holds at `nowMs`. */
  available(key: string, nowMs: number): number {
    const b = this.buckets.get(key);
    return b ? this.refilled(b, nowMs) : this.burst;
  }

  /**
   * Takes `cost` tokens from `key`'s bucket at `nowMs` and returns true, or takes none
   * and returns false when the bucket holds fewer than `cost`.
   */
  take(key: string, cost: number, nowMs: number): boolean {
    let b = this.buckets.get(key);
    if (b === undefined) {
      if (this.buckets.size >= this.maxKeys) this.prune(nowMs);
      b = { tokens: this.burst, atMs: nowMs };
    } else {
      b.tokens = this.refilled(b, nowMs);
      b.atMs = Math.max(b.atMs, nowMs);
      this.buckets.delete(key); // re-inserted below: the Map's order is least recently used first
    }
    this.buckets.set(key, b);
    if (b.tokens < cost) return false;
    b.tokens -= cost;
    return true;
  }

  /** Keys held (full buckets may be among them until the next prune). */
  size(): number {
    return this.buckets.size;
  }

  /** Forgets full buckets, then the least recently used ones down to 3/4 of maxKeys. Returns how many were forgotten. */
  prune(nowMs: number): number {
    const before = this.buckets.size;
    for (const [key, b] of this.buckets) if (this.refilled(b, nowMs) >= this.burst) this.buckets.delete(key);
    const target = Math.floor((this.maxKeys * 3) / 4);
    for (const key of this.buckets.keys()) {
      if (this.buckets.size <= target) break;
      this.buckets.delete(key);
    }
    return before - this.buckets.size;
  }

  private refilled(b: Bucket, nowMs: number): number {
    // A clock that steps back adds nothing (and takes nothing away).
    const elapsed = nowMs > b.atMs ? nowMs - b.atMs : 0;
    return Math.min(this.burst, b.tokens + elapsed * this.ratePerMs);
  }
}
