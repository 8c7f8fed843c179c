/**
 * Keys remembered for a fixed time, at most `max` of them: a lookup's negative answer
 * (an estimator that does not exist) kept so that a unit naming unknown estimators costs
 * one query per key and period, without the memory growing with every key it invents.
 * One lifetime for all keys, and a key re-added moves to the end, so the Map's insertion
 * order is expiry order: expired and surplus keys are always at its start.
 */
export class ExpiringKeys {
  private readonly until = new Map<string, number>();

  constructor(
    private readonly ttlMs: number,
    private readonly max: number,
  ) {}

  get size(): number {
    return this.until.size;
  }

  has(key: string, nowMs: number): boolean {
    const u = this.until.get(key);
    return u !== undefined && u > nowMs;
  }

  add(key: string, nowMs: number): void {
    this.until.delete(key);
    this.until.set(key, nowMs + this.ttlMs);
    for (const [k, u] of this.until) {
      if (u > nowMs && this.until.size <= this.max) break;
      this.until.delete(k);
    }
  }

  delete(key: string): void {
    this.until.delete(key);
  }
}
