/**
 * Whiteness of the innovations: normalized sample autocorrelation with its
 * confidence bounds, and the Ljung–Box portmanteau statistic.
 *
 * Methods:
 * - Autocorrelation test of the innovations with ±z/√N bounds: Bar-Shalom, Li &
 *   Kirubarajan, "Estimation with Applications to Tracking and Navigation"
 *   (2001), §5.4 (innovation whiteness test); under whiteness r_ℓ is
 *   approximately N(0, 1/N).
 * - Ljung & Box, "On a measure of lack of fit in time series models",
 *   Biometrika 65 (1978) 297–303:
 *     Q = N(N + 2)·Σ_{ℓ=1}^{L} r_ℓ² / (N − ℓ)  ~  χ²_L under whiteness.
 * The sample autocorrelation is the usual one (Box & Jenkins; as in statsmodels'
 * `acf` with `adjusted=False` and its `acorr_ljungbox`):
 *     r_ℓ = Σ_{t=ℓ+1}^{N} (x_t − x̄)(x_{t−ℓ} − x̄) / Σ_{t=1}^{N} (x_t − x̄)².
 *
 * For an m-component whitened innovation w = L⁻¹ν the components are
 * independent under a consistent filter, so each component gets its own Q_i and
 * the check uses Q = Σ_i Q_i ~ χ²_{L·m}. (Cross-correlations between components,
 * as in Hosking's multivariate portmanteau, are not included: they would cost
 * O(L·m²) per sample.)
 *
 * Streaming: per component, running sums over the window of x and x²
 * (compensated, Neumaier) and of the lagged products P_ℓ = Σ x_t·x_{t−ℓ}
 * (pairs with both ends in the window; plain sums, for speed). A new sample
 * adds L products and the evicted one removes L, so an update is O(L·m). All
 * sums are recomputed from the window every 16th wrap of the ring buffer
 * (O(L·m) amortized), and at once when an evicted value was an outlier
 * (x² > 10⁶ × the window's mean square): the plain sums would otherwise keep
 * the rounding error of its large products after it has left. The demeaned
 * numerator is recovered exactly from them:
 *   Σ_{t=ℓ+1}^{N}(x_t − x̄)(x_{t−ℓ} − x̄) = P_ℓ − x̄·(2S₁ − head_ℓ − tail_ℓ) + (N − ℓ)·x̄²
 * where S₁ = Σ x, head_ℓ the sum of the oldest ℓ and tail_ℓ of the newest ℓ
 * values, so the streaming statistics equal the batch ones on the same window
 * (up to rounding). Evaluating Q is O(L·m).
 */
import { CompensatedSums } from '../stats/compensated-sum';
import { chiSquareSurvival, chiSquareUpperCritical, normalQuantile } from '../stats/chi-square';
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

// ---------------------------------------------------------------------------
// Batch functions (reference implementations)

/** r_0 … r_maxLag of a series (r_0 = 1), demeaned with the full-sample mean. */
export function autocorrelation(x: ArrayLike<number>, maxLag: number): number[] {
  const N = x.length;
  if (!Number.isInteger(maxLag) || maxLag < 0 || maxLag >= N) {
    throw new RangeError(`maxLag must be an integer in [0, ${N - 1}], got ${maxLag}`);
  }
  let mean = 0;
  for (let t = 0; t < N; t++) mean += x[t];
  mean /= N;
  let denominator = 0;
  for (let t = 0; t < N; t++) denominator += (x[t] - mean) ** 2;
  const r = [1];
  for (let l = 1; l <= maxLag; l++) {
    let numerator = 0;
    for (let t = l; t < N; t++) numerator += (x[t] - mean) * (x[t - l] - mean);
    r.push(denominator > 0 ? numerator / denominator : 0);
  }
  return r;
}

export interface LjungBoxResult {
  /** Q = N(N+2)·Σ r_ℓ²/(N − ℓ) */
  statistic: number;
  dof: number;
  /** P(χ²_dof > Q) */
  pValue: number;
}

/** Ljung–Box Q over lags 1…lags of one series (as statsmodels' acorr_ljungbox with model_df = 0). */
export function ljungBox(x: ArrayLike<number>, lags: number): LjungBoxResult {
  const N = x.length;
  const r = autocorrelation(x, lags);
  let sum = 0;
  for (let l = 1; l <= lags; l++) sum += (r[l] * r[l]) / (N - l);
  const statistic = N * (N + 2) * sum;
  return { statistic, dof: lags, pValue: chiSquareSurvival(statistic, lags) };
}

// ---------------------------------------------------------------------------
// Streaming test

export interface WhitenessTestConfig extends Significance {
  /** N */
  windowLength: number;
  /** Components of the whitened innovation. */
  m: number;
  /** L, the largest lag (1 ≤ L < N). */
  lags: number;
}

export interface WhitenessTestState {
  kind: 'whiteness';
  version: 1;
  config: WhitenessTestConfig;
  /** The window, packed by packFloat64 (checkpoints before it held plain arrays, still read). */
  values: number[] | string;
  next: number;
  count: number;
  /** Compensated accumulators, per component i: [S₁, S₂], each as (sum, c). */
  sums: number[] | string;
  /** Lagged products, per component i: P_1 … P_L. */
  products: number[] | string;
  total: number;
}

export interface WhitenessComponentEvidence {
  /** r_1 … r_L */
  autocorrelation: number[];
  /** Ljung–Box Q_i of this component. */
  ljungBox: number;
  pValue: number;
}

export interface WhitenessEvidence {
  ready: boolean;
  verdict: Verdict;
  samples: number;
  total: number;
  lags: number;
  components: WhitenessComponentEvidence[];
  /** ±bound on each r_ℓ: Φ⁻¹(1 − α′/2)/√N with α′ the marginal level. */
  autocorrelationBound: number;
  /** Coefficients r_{i,ℓ} outside ±bound, and the number expected by chance (α′·L·m). */
  outsideBound: number;
  expectedOutside: number;
  /** Q = Σ_i Q_i */
  statistic: number;
  dof: number;
  /** P(χ²_{L·m} > Q) */
  pValue: number;
  /** Critical values of Q at alpha and alphaMarginal. */
  critical: number;
  marginalCritical: number;
  alpha: number;
  alphaMarginal: number;
}

/** Wraps of the ring buffer between recomputations of the running sums from the window. */
const RECOMPUTE_WRAPS = 16;
/** An evicted x with x² above this multiple of the window's mean square triggers a recomputation. */
const OUTLIER_RATIO = 1e6;

export class WhitenessTest {
  readonly config: Readonly<WhitenessTestConfig>;
  private readonly values: Float64Array;
  /** Per component i, S₁ at 2i and S₂ at 2i + 1. */
  private readonly sums: CompensatedSums;
  /** Per component i, P_ℓ at i·L + ℓ − 1. */
  private readonly products: Float64Array;
  private next = 0;
  private count = 0;
  private total = 0;
  private readonly critical: number;
  private readonly marginalCritical: number;
  /** r_ℓ scratch for evaluation (no allocation per sample). */
  private readonly r: Float64Array;

  constructor(config: WhitenessTestConfig) {
    assertWindowLength(config.windowLength, 3);
    assertSignificance(config);
    if (!Number.isInteger(config.m) || config.m < 1) throw new RangeError(`m must be a positive integer, got ${config.m}`);
    if (!Number.isInteger(config.lags) || config.lags < 1 || config.lags >= config.windowLength) {
      throw new RangeError(`lags must be an integer in [1, windowLength − 1], got ${config.lags}`);
    }
    this.config = Object.freeze({
      windowLength: config.windowLength,
      m: config.m,
      lags: config.lags,
      alpha: config.alpha,
      alphaMarginal: config.alphaMarginal,
    });
    const { windowLength: N, m, lags: L } = this.config;
    this.values = new Float64Array(N * m);
    this.sums = new CompensatedSums(2 * m);
    this.products = new Float64Array(L * m);
    this.critical = chiSquareUpperCritical(L * m, config.alpha);
    this.marginalCritical = chiSquareUpperCritical(L * m, config.alphaMarginal);
    this.r = new Float64Array(L + 1);
  }

  /** Adds one whitened innovation (first m entries of w). O(L·m). */
  push(w: Float64Array): void {
    const { windowLength: N, m, lags: L } = this.config;
    const values = this.values;
    const sums = this.sums;
    const P = this.products;
    const slot = this.next;
    let outlierLeft = false;
    if (this.count === N) {
      // Evict the oldest sample (at `slot`) and its pairs with the L samples after it.
      for (let i = 0; i < m; i++) {
        const xo = values[slot * m + i];
        const xo2 = xo * xo;
        sums.add(2 * i, -xo);
        sums.add(2 * i + 1, -xo2);
        const p = i * L - 1;
        let partner = slot;
        for (let l = 1; l <= L; l++) {
          partner = partner + 1 === N ? 0 : partner + 1;
          P[p + l] -= xo * values[partner * m + i];
        }
        if (xo2 > OUTLIER_RATIO * (sums.value(2 * i + 1) / (N - 1))) outlierLeft = true;
      }
      this.count--;
    }
    // Add the new sample and its pairs with the (up to) L samples before it.
    const available = this.count < L ? this.count : L;
    for (let i = 0; i < m; i++) {
      const x = w[i];
      sums.add(2 * i, x);
      sums.add(2 * i + 1, x * x);
      const p = i * L - 1;
      let partner = slot;
      for (let l = 1; l <= available; l++) {
        partner = partner === 0 ? N - 1 : partner - 1;
        P[p + l] += x * values[partner * m + i];
      }
      values[slot * m + i] = x;
    }
    this.count++;
    this.total++;
    this.next = slot + 1;
    if (this.next === N) {
      this.next = 0;
      // recompute every RECOMPUTE_WRAPS wraps, counted by total samples
      if ((this.total / N) % RECOMPUTE_WRAPS === 0) outlierLeft = true;
    }
    if (outlierLeft) this.recompute();
  }

  get ready(): boolean {
    return this.count === this.config.windowLength;
  }

  /** Ljung–Box Q = Σ_i Q_i of the current window (0 until ready). O(L·m). */
  statistic(): number {
    if (!this.ready) return 0;
    let Q = 0;
    for (let i = 0; i < this.config.m; i++) Q += this.componentQ(i);
    return Q;
  }

  severity(): Severity {
    if (!this.ready) return 0;
    const Q = this.statistic();
    if (Q > this.critical) return 2;
    if (Q > this.marginalCritical) return 1;
    return 0;
  }

  verdict(): Verdict {
    return verdictOf(this.severity());
  }

  pValue(): number {
    if (!this.ready) return 1;
    return chiSquareSurvival(this.statistic(), this.config.lags * this.config.m);
  }

  evidence(): WhitenessEvidence {
    const { windowLength: N, m, lags: L, alpha, alphaMarginal } = this.config;
    const ready = this.ready;
    const bound = normalQuantile(1 - alphaMarginal / 2) / Math.sqrt(N);
    const components: WhitenessComponentEvidence[] = [];
    let outside = 0;
    let Q = 0;
    if (ready) {
      for (let i = 0; i < m; i++) {
        const Qi = this.componentQ(i); // fills this.r
        Q += Qi;
        const r = Array.from(this.r.subarray(1, L + 1));
        for (const rl of r) if (Math.abs(rl) > bound) outside++;
        components.push({ autocorrelation: r, ljungBox: Qi, pValue: chiSquareSurvival(Qi, L) });
      }
    }
    return {
      ready,
      verdict: this.verdict(),
      samples: this.count,
      total: this.total,
      lags: L,
      components,
      autocorrelationBound: bound,
      outsideBound: outside,
      expectedOutside: alphaMarginal * L * m,
      statistic: Q,
      dof: L * m,
      pValue: this.pValue(),
      critical: this.critical,
      marginalCritical: this.marginalCritical,
      alpha,
      alphaMarginal,
    };
  }

  serialize(): WhitenessTestState {
    return {
      kind: 'whiteness',
      version: 1,
      config: { ...this.config },
      values: packFloat64(this.values),
      next: this.next,
      count: this.count,
      sums: packFloat64(this.sums.toArray()),
      products: packFloat64(this.products),
      total: this.total,
    };
  }

  static restore(state: unknown): WhitenessTest {
    const s = expectKind(state, 'whiteness', 1);
    const config = s['config'] as WhitenessTestConfig;
    if (typeof config !== 'object' || config === null) throw new CheckpointError('whiteness: missing config');
    const test = new WhitenessTest(config);
    const { windowLength: N, m } = test.config;
    test.values.set(expectNumberArray(s['values'], N * m, 'whiteness values'));
    test.sums.load(expectNumberArray(s['sums'], 2 * test.sums.count, 'whiteness sums'));
    test.products.set(expectNumberArray(s['products'], test.products.length, 'whiteness products'));
    test.next = expectInteger(s['next'], 0, N - 1, 'whiteness next');
    test.count = expectInteger(s['count'], 0, N, 'whiteness count');
    test.total = expectInteger(s['total'], 0, Number.MAX_SAFE_INTEGER, 'whiteness total');
    return test;
  }

  /** Q_i of component i; leaves r_1 … r_L in this.r. Window must be non-empty. */
  private componentQ(i: number): number {
    const { windowLength: N, m, lags: L } = this.config;
    const values = this.values;
    const sums = this.sums;
    const P = this.products;
    const r = this.r;
    const p = i * L - 1;
    const n = this.count;
    const S1 = sums.value(2 * i);
    const S2 = sums.value(2 * i + 1);
    const mean = S1 / n;
    // Σ(x − x̄)² = S₂ − S₁·x̄
    const denominator = S2 - S1 * mean;
    const oldest = n === N ? this.next : 0;
    let newest = oldest + n - 1;
    if (newest >= N) newest -= N;
    let head = 0;
    let tail = 0;
    let headSlot = oldest;
    let tailSlot = newest;
    let sum = 0;
    for (let l = 1; l <= L; l++) {
      head += values[headSlot * m + i];
      tail += values[tailSlot * m + i];
      headSlot = headSlot + 1 === N ? 0 : headSlot + 1;
      tailSlot = tailSlot === 0 ? N - 1 : tailSlot - 1;
      // Σ_{t=ℓ+1}^{n}(x_t − x̄)(x_{t−ℓ} − x̄) = P_ℓ − x̄(2S₁ − head_ℓ − tail_ℓ) + (n − ℓ)x̄²
      const numerator = P[p + l] - mean * (2 * S1 - head - tail) + (n - l) * mean * mean;
      const rl = denominator > 0 ? numerator / denominator : 0;
      r[l] = rl;
      sum += (rl * rl) / (n - l);
    }
    return n * (n + 2) * sum;
  }

  /** Recomputes every running sum from the window (in time order: oldest first). */
  private recompute(): void {
    const { windowLength: N, m, lags: L } = this.config;
    const values = this.values;
    const sums = this.sums;
    const P = this.products;
    const n = this.count;
    const oldest = n === N ? this.next : 0;
    for (let i = 0; i < m; i++) {
      sums.set(2 * i, 0);
      sums.set(2 * i + 1, 0);
      const p = i * L - 1;
      for (let l = 1; l <= L; l++) P[p + l] = 0;
      for (let t = 0; t < n; t++) {
        let slot = oldest + t;
        if (slot >= N) slot -= N;
        const x = values[slot * m + i];
        sums.add(2 * i, x);
        sums.add(2 * i + 1, x * x);
        const lmax = t < L ? t : L;
        let partner = slot;
        for (let l = 1; l <= lmax; l++) {
          partner = partner === 0 ? N - 1 : partner - 1;
          P[p + l] += x * values[partner * m + i];
        }
      }
    }
  }
}
