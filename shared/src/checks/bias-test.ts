/**
 * Sliding-window bias test on the whitened innovation w = L⁻¹·ν.
 *
 * Method: Bar-Shalom, Li & Kirubarajan, "Estimation with Applications to Tracking
 * and Navigation" (2001), §5.4 (innovation zero-mean test). Under a consistent
 * filter w_k ~ N(0, I_m) independently over k, so each component's window mean
 *   w̄_i = (1/N)·Σ_k w_{k,i}  ~  N(0, 1/N),
 * and component i is accepted when |w̄_i| ≤ z/√N. With m components tested at
 * once the level is split (Bonferroni, Dunn 1961): z = Φ⁻¹(1 − α/(2m)), so the
 * family of m tests has false-alarm probability at most α. The check's p-value
 * is the Bonferroni-adjusted minimum, min(1, m·min_i p_i).
 *
 * Streaming: a ring buffer of the last N whitened vectors and one compensated
 * running sum per component, recomputed at every wrap — O(m) per sample.
 */
import { CompensatedSums } from '../stats/compensated-sum';
import { normalQuantile, normalTwoSidedPValue } from '../stats/chi-square';
import {
  CheckpointError,
  Severity,
  Significance,
  Verdict,
  assertSignificance,
  assertWindowLength,
  expectInteger,
  expectKind,
  expectNumberArray,
  packFloat64,
  verdictOf,
} from './verdict';

// Builtins used per sample, bound once: looking up the global `Math`/`Number`
// on every call is slow in sandboxed runners (jest's vm contexts, nodejs/node#49283).
const { abs } = Math;

export interface BiasTestConfig extends Significance {
  windowLength: number;
  /** Components of the whitened innovation. */
  m: number;
}

export interface BiasTestState {
  kind: 'bias';
  version: 1;
  config: BiasTestConfig;
  /** Ring buffer, N·m, sample-major. */
  /** The window, packed by packFloat64 (checkpoints before it held plain arrays, still read). */
  values: number[] | string;
  next: number;
  count: number;
  /** Compensated sums: [sum_0, c_0, sum_1, c_1, …]. */
  sums: number[] | string;
  total: number;
}

export interface BiasComponentEvidence {
  /** w̄_i */
  mean: number;
  /** √N·w̄_i, standard normal under a consistent filter. */
  z: number;
  /** Strict bound on |w̄_i|: Φ⁻¹(1 − α/(2m))/√N. */
  bound: number;
  /** Marginal bound on |w̄_i|. */
  marginalBound: number;
  /** Two-sided p-value of this component (unadjusted). */
  pValue: number;
  verdict: Verdict;
}

export interface BiasEvidence {
  ready: boolean;
  verdict: Verdict;
  samples: number;
  total: number;
  components: BiasComponentEvidence[];
  /** Bonferroni-adjusted p-value of the whole test. */
  pValue: number;
  alpha: number;
  alphaMarginal: number;
}

export class BiasTest {
  readonly config: Readonly<BiasTestConfig>;
  private readonly values: Float64Array;
  private readonly sums: CompensatedSums;
  private next = 0;
  private count = 0;
  private total = 0;
  /** Bounds on |Σ w_i| (sum scale): z·√N. */
  private readonly strictSumBound: number;
  private readonly marginalSumBound: number;

  constructor(config: BiasTestConfig) {
    assertWindowLength(config.windowLength);
    assertSignificance(config);
    if (!Number.isInteger(config.m) || config.m < 1) throw new RangeError(`m must be a positive integer, got ${config.m}`);
    this.config = Object.freeze({ windowLength: config.windowLength, m: config.m, alpha: config.alpha, alphaMarginal: config.alphaMarginal });
    const { windowLength: N, m } = this.config;
    this.values = new Float64Array(N * m);
    this.sums = new CompensatedSums(m);
    const sqrtN = Math.sqrt(N);
    // |w̄_i| > z/√N  ⇔  |Σ w_i| > z·√N
    this.strictSumBound = normalQuantile(1 - config.alpha / (2 * m)) * sqrtN;
    this.marginalSumBound = normalQuantile(1 - config.alphaMarginal / (2 * m)) * sqrtN;
  }

  /** Adds one whitened innovation (first m entries of w). O(m) amortized. */
  push(w: Float64Array): void {
    const { windowLength: N, m } = this.config;
    const values = this.values;
    const sums = this.sums;
    const base = this.next * m;
    if (this.count === N) {
      for (let i = 0; i < m; i++) sums.add(i, -values[base + i]);
    } else {
      this.count++;
    }
    for (let i = 0; i < m; i++) {
      const x = w[i];
      values[base + i] = x;
      sums.add(i, x);
    }
    this.total++;
    this.next++;
    if (this.next === N) {
      this.next = 0;
      this.recompute();
    }
  }

  get ready(): boolean {
    return this.count === this.config.windowLength;
  }

  severity(): Severity {
    if (this.count !== this.config.windowLength) return 0;
    const m = this.config.m;
    let worst = 0;
    for (let i = 0; i < m; i++) {
      const a = abs(this.sums.value(i));
      if (a > worst) worst = a;
    }
    if (worst > this.strictSumBound) return 2;
    if (worst > this.marginalSumBound) return 1;
    return 0;
  }

  verdict(): Verdict {
    return verdictOf(this.severity());
  }

  /** Bonferroni-adjusted p-value min(1, m·min_i p_i); 1 until ready. */
  pValue(): number {
    if (!this.ready) return 1;
    const { windowLength: N, m } = this.config;
    let minP = 1;
    for (let i = 0; i < m; i++) {
      const p = normalTwoSidedPValue(this.sums.value(i) / Math.sqrt(N));
      if (p < minP) minP = p;
    }
    return Math.min(1, m * minP);
  }

  evidence(): BiasEvidence {
    const { windowLength: N, m, alpha, alphaMarginal } = this.config;
    const n = this.count;
    const components: BiasComponentEvidence[] = [];
    for (let i = 0; i < m; i++) {
      const sum = this.sums.value(i);
      const mean = n > 0 ? sum / n : 0;
      const z = mean * Math.sqrt(n);
      const a = Math.abs(sum);
      const severity: Severity = !this.ready ? 0 : a > this.strictSumBound ? 2 : a > this.marginalSumBound ? 1 : 0;
      components.push({
        mean,
        z,
        bound: this.strictSumBound / N,
        marginalBound: this.marginalSumBound / N,
        pValue: normalTwoSidedPValue(z),
        verdict: verdictOf(severity),
      });
    }
    return { ready: this.ready, verdict: this.verdict(), samples: n, total: this.total, components, pValue: this.pValue(), alpha, alphaMarginal };
  }

  serialize(): BiasTestState {
    return {
      kind: 'bias',
      version: 1,
      config: { ...this.config },
      values: packFloat64(this.values),
      next: this.next,
      count: this.count,
      sums: packFloat64(this.sums.toArray()),
      total: this.total,
    };
  }

  static restore(state: unknown): BiasTest {
    const s = expectKind(state, 'bias', 1);
    const config = s['config'] as BiasTestConfig;
    if (typeof config !== 'object' || config === null) throw new CheckpointError('bias: missing config');
    const test = new BiasTest(config);
    const { windowLength: N, m } = test.config;
    test.values.set(expectNumberArray(s['values'], N * m, 'bias values'));
    test.sums.load(expectNumberArray(s['sums'], 2 * m, 'bias sums'));
    test.next = expectInteger(s['next'], 0, N - 1, 'bias next');
    test.count = expectInteger(s['count'], 0, N, 'bias count');
    test.total = expectInteger(s['total'], 0, Number.MAX_SAFE_INTEGER, 'bias total');
    return test;
  }

  private recompute(): void {
    const { m } = this.config;
    const values = this.values;
    const sums = this.sums;
    for (let i = 0; i < m; i++) sums.set(i, 0);
    for (let k = 0; k < this.count; k++) {
      const base = k * m;
      for (let i = 0; i < m; i++) sums.add(i, values[base + i]);
    }
  }
}
