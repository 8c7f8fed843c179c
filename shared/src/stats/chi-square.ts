/**
 * Chi-square and standard normal distribution functions: the one module through
 * which Whitecap uses a statistics library for them.
 *
 * Method: the chi-square CDF is the regularized lower incomplete gamma function,
 * F(x; k) = P(k/2, x/2), and its quantile the inverse of it (Abramowitz & Stegun,
 * "Handbook of Mathematical Functions", 1964, §26.4.19). Both come from stdlib
 * (@stdlib/stats-base-dists-chisquare-cdf and -quantile): stdlib's incomplete
 * gamma routines are ports of long-tested numerical code (Boost.Math and
 * Cephes), each function is its own small package, and they run unchanged in a
 * browser (the dashboard imports this module).
 *
 * One correction, measured here against SciPy: in the installed versions
 * (chisquare-cdf 0.3.1, chisquare-quantile 0.2.3, math-base-special-gammainc
 * 0.2.x) the CDF is wrong from about k = 1800 up (|error| 9e-3 at k = 2000,
 * 2.5e-2 at k = 3000, near the median), through its large-shape (Temme)
 * branch; below k = 1750 it agreed with SciPy to 1e-15. Window tests reach such
 * k (N·m = 2000 for N = 1000, m = 2), so for k > 1000 this module evaluates
 * P(a, x) itself: the power series for x < a + 1 and the Legendre continued
 * fraction (modified Lentz) otherwise (Numerical Recipes, 3rd ed., 2007,
 * §6.2), with the prefactor xᵃe⁻ˣ/Γ(a) written as √(a/2π)·exp(−a·φ(x/a))/Γ*(a),
 * φ(λ) = λ − 1 − ln λ and Γ* Stirling's series (DLMF §5.11), which loses no
 * digits to cancellation at large a; the quantile is stdlib's (a close start)
 * refined by Newton steps on that CDF.
 *
 * The standard normal quantile and CDF are derived from the chi-square with one
 * degree of freedom (Z² ~ χ²₁): z_p = sign(p − ½)·√(χ²₁⁻¹(|2p − 1|)). This keeps
 * one library behind one module; simple-statistics' `probit` was measured here at
 * only ~3 significant digits (1.9572 for p = 0.975, against 1.959964).
 *
 * Precision note: upper-tail probabilities are computed as 1 − F, so p-values
 * below ~1e-16 are reported as 0.
 */
import chisquareCdfImpl from '@stdlib/stats-base-dists-chisquare-cdf';
import chisquareQuantileImpl from '@stdlib/stats-base-dists-chisquare-quantile';

function assertDof(dof: number): void {
  if (!(dof > 0) || !Number.isFinite(dof)) {
    throw new RangeError(`degrees of freedom must be a positive finite number, got ${dof}`);
  }
}

function assertProbability(p: number, name: string): void {
  if (!(p >= 0 && p <= 1)) {
    throw new RangeError(`${name} must be a probability in [0, 1], got ${p}`);
  }
}

/** Degrees of freedom above which this module's own incomplete gamma replaces stdlib's. */
const LARGE_DOF = 1000;

/** F(x; k) = P(χ²_k ≤ x). */
export function chiSquareCdf(x: number, dof: number): number {
  assertDof(dof);
  if (dof > LARGE_DOF) return regularizedGammaP(dof / 2, x / 2);
  return chisquareCdfImpl(x, dof);
}

/** Upper tail 1 − F(x; k) = P(χ²_k > x), clamped to [0, 1]. */
export function chiSquareSurvival(x: number, dof: number): number {
  const q = 1 - chiSquareCdf(x, dof);
  return q < 0 ? 0 : q > 1 ? 1 : q;
}

/** x such that F(x; k) = p. */
export function chiSquareQuantile(p: number, dof: number): number {
  assertDof(dof);
  assertProbability(p, 'p');
  const start = chisquareQuantileImpl(p, dof);
  if (dof <= LARGE_DOF || p === 0 || p === 1) return start;
  // Newton on F(x) − p from stdlib's (close) value: x ← x − (F(x) − p)/f(x),
  // with the density f(x) = R(k/2, x/2)/x, R(a, t) = tᵃe⁻ᵗ/Γ(a).
  const a = dof / 2;
  let x = start;
  for (let iteration = 0; iteration < 50; iteration++) {
    const F = regularizedGammaP(a, x / 2);
    const f = gammaPrefactor(a, x / 2) / x;
    if (!(f > 0)) break;
    let step = (F - p) / f;
    if (step > 0.5 * x) step = 0.5 * x; // keep x > 0
    x -= step;
    if (Math.abs(step) <= 1e-15 * x) break;
  }
  return x;
}

// --- incomplete gamma for large shape a ------------------------------------------

/** ln Γ*(a) = ln Γ(a) − ln(√(2π/a)·(a/e)ᵃ), Stirling's series (DLMF 5.11.1), for a ≥ 10. */
function logGammaStar(a: number): number {
  const a2 = a * a;
  return (1 / (12 * a)) * (1 - (1 / (30 * a2)) * (1 - (2 / (7 * a2)) * (1 - 3 / (4 * a2))));
}

/** φ(λ) = λ − 1 − ln λ for λ = 1 + μ, by its series when |μ| is small (no cancellation). */
function phi(mu: number): number {
  if (Math.abs(mu) > 0.25) return mu - Math.log1p(mu);
  // μ − ln(1 + μ) = μ²/2 − μ³/3 + μ⁴/4 − …
  let term = mu * mu;
  let sum = 0;
  for (let n = 2; n < 200; n++) {
    const t = term / n;
    sum += n % 2 === 0 ? t : -t;
    if (Math.abs(t) < 1e-17 * Math.abs(sum)) break;
    term *= mu;
  }
  return sum;
}

/** R(a, x) = xᵃe⁻ˣ/Γ(a) = √(a/2π)·exp(−a·φ(x/a))/Γ*(a). */
function gammaPrefactor(a: number, x: number): number {
  if (x <= 0) return 0;
  return Math.sqrt(a / (2 * Math.PI)) * Math.exp(-a * phi((x - a) / a) - logGammaStar(a));
}

/** Regularized lower incomplete gamma P(a, x), for a ≥ 10. */
function regularizedGammaP(a: number, x: number): number {
  if (!(x > 0)) return x === 0 ? 0 : NaN;
  if (x === Infinity) return 1;
  const R = gammaPrefactor(a, x);
  if (x < a + 1) {
    // P = (R/a)·Σ_{n≥0} xⁿ/((a+1)…(a+n))
    let term = 1;
    let sum = 1;
    for (let n = 1; n < 100000; n++) {
      term *= x / (a + n);
      sum += term;
      if (term < 1e-17 * sum) break;
    }
    return Math.min(1, (R / a) * sum);
  }
  // Q = R·1/(x + 1 − a − 1·(1 − a)/(x + 3 − a − 2·(2 − a)/(x + 5 − a − …))), modified Lentz
  const tiny = 1e-300;
  let b = x + 1 - a;
  let c = 1 / tiny;
  let d = 1 / b;
  let h = d;
  for (let i = 1; i < 100000; i++) {
    const an = -i * (i - a);
    b += 2;
    d = an * d + b;
    if (Math.abs(d) < tiny) d = tiny;
    c = b + an / c;
    if (Math.abs(c) < tiny) c = tiny;
    d = 1 / d;
    const delta = d * c;
    h *= delta;
    if (Math.abs(delta - 1) < 1e-16) break;
  }
  const Q = R * h;
  return Math.max(0, 1 - Q);
}

/** Two-sided p-value of x under χ²_k: 2·min(F, 1 − F), at most 1. */
export function chiSquareTwoSidedPValue(x: number, dof: number): number {
  const F = chiSquareCdf(x, dof);
  const p = 2 * Math.min(F, 1 - F);
  return p > 1 ? 1 : p < 0 ? 0 : p;
}

/** Standard normal quantile Φ⁻¹(p), via Z² ~ χ²₁. */
export function normalQuantile(p: number): number {
  assertProbability(p, 'p');
  if (p === 0.5) return 0;
  const r = Math.sqrt(chisquareQuantileImpl(Math.abs(2 * p - 1), 1));
  return p > 0.5 ? r : -r;
}

/** Standard normal CDF Φ(z), via Z² ~ χ²₁. */
export function normalCdf(z: number): number {
  if (Number.isNaN(z)) return NaN;
  const half = 0.5 * chisquareCdfImpl(z * z, 1);
  return z >= 0 ? 0.5 + half : 0.5 - half;
}

/** Two-sided normal p-value 2·(1 − Φ(|z|)) = 1 − F(z²; 1). */
export function normalTwoSidedPValue(z: number): number {
  return chiSquareSurvival(z * z, 1);
}

/** A two-sided acceptance interval [lower, upper] with P(outside) = alpha. */
export interface Interval {
  readonly lower: number;
  readonly upper: number;
}

// Critical values are asked for again and again with the same few (dof, alpha)
// pairs (every estimator with the same window and measurement size), and a
// quantile costs ~7 µs: memoize them. The cache is bounded and simply cleared
// when full, which only costs recomputation.
const MAX_CACHE = 4096;
const intervalCache = new Map<string, Interval>();
const upperCache = new Map<string, number>();

/** [χ²_k⁻¹(α/2), χ²_k⁻¹(1 − α/2)], memoized. */
export function chiSquareInterval(dof: number, alpha: number): Interval {
  const key = `${dof}|${alpha}`;
  let interval = intervalCache.get(key);
  if (interval === undefined) {
    assertProbability(alpha, 'alpha');
    interval = Object.freeze({
      lower: chiSquareQuantile(alpha / 2, dof),
      upper: chiSquareQuantile(1 - alpha / 2, dof),
    });
    if (intervalCache.size >= MAX_CACHE) intervalCache.clear();
    intervalCache.set(key, interval);
  }
  return interval;
}

/** χ²_k⁻¹(1 − α), the one-sided upper critical value, memoized. */
export function chiSquareUpperCritical(dof: number, alpha: number): number {
  const key = `${dof}|${alpha}`;
  let value = upperCache.get(key);
  if (value === undefined) {
    assertProbability(alpha, 'alpha');
    value = chiSquareQuantile(1 - alpha, dof);
    if (upperCache.size >= MAX_CACHE) upperCache.clear();
    upperCache.set(key, value);
  }
  return value;
}
