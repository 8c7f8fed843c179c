/**
 * Sliding-window chi-square test of a filter's normalized errors (NIS or NEES).
 *
 * Method: Bar-Shalom, Li & Kirubarajan, "Estimation with Applications to Tracking
 * and Navigation" (2001), §5.4.2–5.4.3. For a consistent filter the NIS values of
 * different time steps are independent χ²_m variables, so the sum of the last N
 *   ε_N = Σ_{k=K−N+1}^{K} ε_k  ~  χ²_{N·m},
 * and the filter is accepted at significance α when
 *   χ²_{Nm}⁻¹(α/2) ≤ ε_N ≤ χ²_{Nm}⁻¹(1 − α/2)
 * (equivalently, the time-average ε_N/N within those bounds divided by N).
 * The same test applies to NEES with n in place of m.
 *
 * Also kept, as evidence: how many single values in the window fall outside the
 * single-sample two-sided interval [χ²_m⁻¹(α′/2), χ²_m⁻¹(1 − α′/2)] (α′ the
 * marginal level), against its expected fraction α′, with the binomial
 * upper-tail p-value of that count.
 *
 * Streaming: a ring buffer of the last N values and a compensated running sum
 * (Neumaier), recomputed from the buffer at every wrap — O(1) amortized.
 */
import { CompensatedSums } from '../stats/compensated-sum';
import { binomialUpperTail } from '../stats/binomial';
import { Interval, chiSquareInterval, chiSquareTwoSidedPValue } from '../stats/chi-square';
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

export interface ChiSquareWindowConfig extends Significance {
  /** N, the number of samples in the window. */
  windowLength: number;
  /** Degrees of freedom of one value: m for NIS, n for NEES. */
  dofPerSample: number;
}

export interface ChiSquareWindowState {
  kind: 'chi-square-window';
  version: 1;
  config: ChiSquareWindowConfig;
  /** Ring buffer, length N. */
  /** The window, packed by packFloat64 (checkpoints before it held plain arrays, still read). */
  values: number[] | string;
  /** Next slot to write. */
  next: number;
  /** Values in the window (≤ N). */
  count: number;
  /** Compensated sum: [sum, compensation]. */
  sum: [number, number];
  /** Values in the window outside the single-sample interval. */
  outside: number;
  /** Values seen since creation. */
  total: number;
}

export interface ChiSquareWindowEvidence {
  /** False until the window is full; the verdict is then 'consistent' by default. */
  ready: boolean;
  verdict: Verdict;
  /** Values in the window (N once ready). */
  samples: number;
  /** Values seen since creation. */
  total: number;
  /** ε_N, the window sum. */
  statistic: number;
  /** N·m (or N·n). */
  dof: number;
  /** ε_N / samples, to read against dofPerSample. */
  average: number;
  /** Two-sided interval for ε_N at alpha (strict). */
  bounds: Interval;
  /** Two-sided interval for ε_N at alphaMarginal. */
  marginalBounds: Interval;
  /** The strict interval divided by the window length (for the average). */
  averageBounds: Interval;
  /** Two-sided p-value of ε_N under χ²_{dof}. */
  pValue: number;
  alpha: number;
  alphaMarginal: number;
  exceedances: {
    count: number;
    rate: number;
    /** α′ = alphaMarginal */
    expectedRate: number;
    /** The single-sample interval. */
    bounds: Interval;
    /** P(count ≥ observed) under Binomial(samples, α′). */
    pValue: number;
  };
}

export class ChiSquareWindowTest {
  readonly config: Readonly<ChiSquareWindowConfig>;
  private readonly values: Float64Array;
  private readonly acc = new CompensatedSums(1);
  private next = 0;
  private count = 0;
  private outside = 0;
  private total = 0;
  // cached bounds (pure functions of the config)
  private readonly strict: Interval;
  private readonly marginal: Interval;
  private readonly single: Interval;

  constructor(config: ChiSquareWindowConfig) {
    assertWindowLength(config.windowLength);
    assertSignificance(config);
    if (!(config.dofPerSample > 0) || !Number.isFinite(config.dofPerSample)) {
      throw new RangeError(`dofPerSample must be positive, got ${config.dofPerSample}`);
    }
    this.config = Object.freeze({
      windowLength: config.windowLength,
      dofPerSample: config.dofPerSample,
      alpha: config.alpha,
      alphaMarginal: config.alphaMarginal,
    });
    const N = config.windowLength;
    this.values = new Float64Array(N);
    this.strict = chiSquareInterval(N * config.dofPerSample, config.alpha);
    this.marginal = chiSquareInterval(N * config.dofPerSample, config.alphaMarginal);
    this.single = chiSquareInterval(config.dofPerSample, config.alphaMarginal);
  }

  /** Adds one NIS (or NEES) value. O(1) amortized. */
  push(x: number): void {
    const N = this.config.windowLength;
    const values = this.values;
    const slot = this.next;
    if (this.count === N) {
      const old = values[slot];
      this.acc.add(0, -old);
      if (old < this.single.lower || old > this.single.upper) this.outside--;
    } else {
      this.count++;
    }
    values[slot] = x;
    this.acc.add(0, x);
    if (x < this.single.lower || x > this.single.upper) this.outside++;
    this.total++;
    this.next = slot + 1;
    if (this.next === N) {
      this.next = 0;
      this.recomputeSum();
    }
  }

  /** Whether a single value falls outside the single-sample interval (at alphaMarginal). */
  isExceedance(x: number): boolean {
    return x < this.single.lower || x > this.single.upper;
  }

  /** True once the window holds N values. */
  get ready(): boolean {
    return this.count === this.config.windowLength;
  }

  /** ε_N, the current window sum. */
  get statistic(): number {
    return this.acc.value(0);
  }

  /** 0/1/2 from cached bounds; no distribution function on this path. */
  severity(): Severity {
    if (this.count !== this.config.windowLength) return 0;
    const eps = this.acc.value(0);
    if (eps < this.strict.lower || eps > this.strict.upper) return 2;
    if (eps < this.marginal.lower || eps > this.marginal.upper) return 1;
    return 0;
  }

  verdict(): Verdict {
    return verdictOf(this.severity());
  }

  /** Two-sided p-value of the current window (1 until ready). */
  pValue(): number {
    if (!this.ready) return 1;
    return chiSquareTwoSidedPValue(this.statistic, this.config.windowLength * this.config.dofPerSample);
  }

  evidence(): ChiSquareWindowEvidence {
    const { windowLength: N, dofPerSample, alpha, alphaMarginal } = this.config;
    const n = this.count;
    const eps = this.statistic;
    const ready = this.ready;
    return {
      ready,
      verdict: this.verdict(),
      samples: n,
      total: this.total,
      statistic: eps,
      dof: N * dofPerSample,
      average: n > 0 ? eps / n : 0,
      bounds: this.strict,
      marginalBounds: this.marginal,
      averageBounds: { lower: this.strict.lower / N, upper: this.strict.upper / N },
      pValue: this.pValue(),
      alpha,
      alphaMarginal,
      exceedances: {
        count: this.outside,
        rate: n > 0 ? this.outside / n : 0,
        expectedRate: alphaMarginal,
        bounds: this.single,
        pValue: binomialUpperTail(this.outside, n, alphaMarginal),
      },
    };
  }

  serialize(): ChiSquareWindowState {
    return {
      kind: 'chi-square-window',
      version: 1,
      config: { ...this.config },
      values: packFloat64(this.values),
      next: this.next,
      count: this.count,
      sum: [this.acc.acc[0], this.acc.acc[1]],
      outside: this.outside,
      total: this.total,
    };
  }

  static restore(state: unknown): ChiSquareWindowTest {
    const s = expectKind(state, 'chi-square-window', 1);
    const config = s['config'] as ChiSquareWindowConfig;
    if (typeof config !== 'object' || config === null) throw new CheckpointError('chi-square-window: missing config');
    const test = new ChiSquareWindowTest(config);
    const N = test.config.windowLength;
    test.values.set(expectNumberArray(s['values'], N, 'chi-square-window values'));
    test.next = expectInteger(s['next'], 0, N - 1, 'chi-square-window next');
    test.count = expectInteger(s['count'], 0, N, 'chi-square-window count');
    const sum = expectNumberArray(s['sum'], 2, 'chi-square-window sum');
    test.acc.load(sum);
    test.outside = expectInteger(s['outside'], 0, N, 'chi-square-window outside');
    test.total = expectInteger(s['total'], 0, Number.MAX_SAFE_INTEGER, 'chi-square-window total');
    return test;
  }

  private recomputeSum(): void {
    const values = this.values;
    const acc = this.acc;
    acc.set(0, 0);
    for (let i = 0; i < this.count; i++) acc.add(0, values[i]);
  }
}
