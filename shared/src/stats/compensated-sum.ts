/**
 * Compensated running sums for the streaming checks.
 *
 * Method: Neumaier's improvement of Kahan summation (A. Neumaier, "Rundungsfehler-
 * analyse einiger Verfahren zur Summation endlicher Summen", ZAMM 54, 1974):
 *   t = s + x;  c += |s| ≥ |x| ? (s − t) + x : (x − t) + s;  s = t;  value = s + c
 * Sliding-window sums add the newest value and subtract the evicted one; without
 * compensation a single huge value that enters and later leaves the window would
 * wipe out the low-order digits of everything else. The checks also recompute
 * their sums from the window every time their ring buffer wraps (every N
 * samples, so O(1) amortized), which bounds any remaining drift.
 *
 * The accumulators of one check live in one Float64Array (sums at even
 * indices, their compensations at odd ones) so that the hot path allocates
 * nothing. They are methods of a class rather than free functions: a call
 * through another module's export can cost a property getter per call under
 * some module loaders (esbuild's CommonJS output, used by tsx), while a method
 * call on a monomorphic instance is inlined.
 */

// Builtins used per sample, bound once: looking up the global `Math`/`Number`
// on every call is slow in sandboxed runners (jest's vm contexts, nodejs/node#49283).
const { abs } = Math;
export class CompensatedSums {
  /** [s_0, c_0, s_1, c_1, …] */
  readonly acc: Float64Array;

  constructor(count: number) {
    this.acc = new Float64Array(2 * count);
  }

  get count(): number {
    return this.acc.length / 2;
  }

  /** s_i += x, compensated. */
  add(i: number, x: number): void {
    const acc = this.acc;
    const k = 2 * i;
    const s = acc[k];
    const t = s + x;
    if (abs(s) >= abs(x)) acc[k + 1] += s - t + x;
    else acc[k + 1] += x - t + s;
    acc[k] = t;
  }

  /** The compensated value s_i + c_i. */
  value(i: number): number {
    return this.acc[2 * i] + this.acc[2 * i + 1];
  }

  /** Sets s_i = x with no compensation. */
  set(i: number, x: number): void {
    this.acc[2 * i] = x;
    this.acc[2 * i + 1] = 0;
  }

  /** All accumulators (sums and compensations) as plain numbers, for checkpoints. */
  toArray(): number[] {
    return Array.from(this.acc);
  }

  /** Restores from {@link toArray}. */
  load(values: readonly number[]): void {
    this.acc.set(values);
  }
}
