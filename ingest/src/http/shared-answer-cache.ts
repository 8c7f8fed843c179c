// Short-lived answers shared by everyone who asks the same question: the fleet screens
// of many users poll the same summary, and each computation reads every estimator's
// status. An answer is reused for `ttlMs` after it is computed, and while one is being
// computed, everyone asking the same question waits for that one (single flight).
import type { Clock } from '../clock';

interface Entry<T> {
  value: Promise<T>;
  /** When the computation finished (ms on the service clock); null while it runs. */
  settledAt: number | null;
}

export class SharedAnswerCache<T> {
  private readonly entries = new Map<string, Entry<T>>();

  constructor(
    private readonly ttlMs: number,
    private readonly clock: Clock,
    private readonly maxEntries = 500,
  ) {}

  /** The answer to `key`: a fresh one from `compute`, or one computed less than ttlMs ago. A failed computation is not kept. */
  get(key: string, compute: () => Promise<T>): Promise<T> {
    if (this.ttlMs <= 0) return compute();
    const now = this.clock.now();
    const hit = this.entries.get(key);
    if (hit && (hit.settledAt === null || now - hit.settledAt < this.ttlMs)) return hit.value;
    const entry: Entry<T> = { value: compute(), settledAt: null };
    this.entries.set(key, entry);
    entry.value.then(
      () => {
        entry.settledAt = this.clock.now();
      },
      () => {
        if (this.entries.get(key) === entry) this.entries.delete(key);
      },
    );
    if (this.entries.size > this.maxEntries) this.evict(now);
    return entry.value;
  }

  /** Answers kept (settled or under way). */
  size(): number {
    return this.entries.size;
  }

  private evict(now: number): void {
    for (const [key, e] of this.entries) {
      if (e.settledAt !== null && now - e.settledAt >= this.ttlMs) this.entries.delete(key);
    }
    // Still too many distinct questions at once: drop the oldest settled ones.
    for (const [key, e] of this.entries) {
      if (this.entries.size <= this.maxEntries) break;
      if (e.settledAt !== null) this.entries.delete(key);
    }
  }
}
