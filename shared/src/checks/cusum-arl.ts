/**
 * Average run length (ARL) of a one-sided CUSUM, and the threshold that gives a
 * target in-control ARL.
 *
 * A one-sided CUSUM C_k = max(0, C_{k−1} + Y_k), C_0 = 0, signals when C_k > h
 * (Page, "Continuous inspection schemes", Biometrika 41, 1954). Its ARL for i.i.d.
 * increments Y with CDF G is computed by the Markov-chain method of Brook &
 * Evans ("An approach to the probability distribution of CUSUM run length",
 * Biometrika 59, 1972): [0, h] is cut into t states of width w = 2h/(2t − 1),
 * state 0 holding C = 0 (and C < w/2) and state j ≥ 1 the interval centred on
 * j·w; the transient transition probabilities are
 *   R_i0 = G(w/2 − i·w),   R_ij = G((j − i + ½)·w) − G((j − i − ½)·w),
 * and the vector of ARLs from each state solves (I − R)·ARL = 1. R depends only
 * on j − i, so one ARL evaluation needs 2t − 1 CDF values and one t×t solve
 * ((I − R) is a diagonally dominant M-matrix: elimination without pivoting is
 * stable). The CDF is evaluated exactly, so increments with a singular density
 * (χ²₁ at 0) are handled.
 *
 * For normal data, Siegmund's approximation (D. Siegmund, "Sequential Analysis",
 * Springer 1985; as given in Montgomery, "Introduction to Statistical Quality
 * Control") is also provided:
 *   ARL ≈ (exp(−2Δb) + 2Δb − 1) / (2Δ²),  b = h + 1.166,  Δ = μ − k  (ARL ≈ b² when Δ = 0).
 *
 * Two one-sided charts run together are combined as 1/ARL = 1/ARL⁺ + 1/ARL⁻
 * (exact when both charts cannot be non-zero at once, a close approximation
 * otherwise; Montgomery, ibid., §9.1).
 */

/** CDF of one CUSUM increment Y: G(y) = P(Y ≤ y). */
export type IncrementCdf = (y: number) => number;

export const DEFAULT_ARL_STATES = 160;

/** In-control (or any) ARL of the one-sided CUSUM with increments ~ G and threshold h, by Brook & Evans. */
export function cusumArl(G: IncrementCdf, h: number, states: number = DEFAULT_ARL_STATES): number {
  if (!(h >= 0) || !Number.isFinite(h)) throw new RangeError(`h must be a finite number ≥ 0, got ${h}`);
  if (!Number.isInteger(states) || states < 2) throw new RangeError(`states must be an integer ≥ 2, got ${states}`);
  const t = states;
  const w = (2 * h) / (2 * t - 1);
  // g[d + (t − 1)] = G((d + ½)·w) for d = −(t − 1) … t − 1
  const g = new Float64Array(2 * t - 1);
  for (let d = -(t - 1); d <= t - 1; d++) g[d + t - 1] = G((d + 0.5) * w);
  // A = I − R, row-major t×t
  const A = new Float64Array(t * t);
  for (let i = 0; i < t; i++) {
    const row = i * t;
    A[row] = -g[-i + t - 1]; // R_i0 = G((−i + ½)·w)
    for (let j = 1; j < t; j++) {
      const d = j - i;
      A[row + j] = -(g[d + t - 1] - g[d - 1 + t - 1]);
    }
    A[row + i] += 1;
  }
  const b = new Float64Array(t).fill(1);
  // Gaussian elimination without pivoting (A is a diagonally dominant M-matrix).
  for (let k = 0; k < t; k++) {
    const pivot = A[k * t + k];
    if (!(pivot > 0)) return Infinity; // no way out of the transient states
    for (let i = k + 1; i < t; i++) {
      const f = A[i * t + k] / pivot;
      if (f === 0) continue;
      const ri = i * t;
      const rk = k * t;
      for (let j = k + 1; j < t; j++) A[ri + j] -= f * A[rk + j];
      b[i] -= f * b[k];
    }
  }
  const x = new Float64Array(t);
  for (let i = t - 1; i >= 0; i--) {
    let s = b[i];
    for (let j = i + 1; j < t; j++) s -= A[i * t + j] * x[j];
    x[i] = s / A[i * t + i];
  }
  return x[0];
}

/** Siegmund's approximation to the one-sided ARL of a CUSUM on N(μ, 1) data with reference k and threshold h. */
export function siegmundArl(mu: number, k: number, h: number): number {
  const delta = mu - k;
  const b = h + 1.166;
  if (delta === 0) return b * b;
  return (Math.exp(-2 * delta * b) + 2 * delta * b - 1) / (2 * delta * delta);
}

/** 1/ARL = 1/ARL⁺ + 1/ARL⁻ */
export function combinedArl(arlUp: number, arlDown: number): number {
  return 1 / (1 / arlUp + 1 / arlDown);
}

/**
 * The threshold h at which cusumArl(G, h) equals targetArl, by the Illinois
 * variant of false position on ln ARL(h) (ARL increases with h). Throws when the
 * target is below the ARL at h = 0.
 */
export function cusumThresholdForArl(
  G: IncrementCdf,
  targetArl: number,
  options: { states?: number; initialStep?: number; relativeTolerance?: number } = {},
): number {
  const states = options.states ?? DEFAULT_ARL_STATES;
  const tolerance = options.relativeTolerance ?? 1e-7;
  if (!(targetArl > 1) || !Number.isFinite(targetArl)) throw new RangeError(`target ARL must be finite and > 1, got ${targetArl}`);
  const f = (h: number): number => Math.log(cusumArl(G, h, states)) - Math.log(targetArl);
  let lo = 0;
  let flo = f(lo);
  if (flo > 0) throw new RangeError(`target ARL ${targetArl} is below the ARL at h = 0 (${Math.exp(flo) * targetArl})`);
  if (flo === 0) return 0;
  let step = options.initialStep ?? 1;
  let hi = step;
  let fhi = f(hi);
  while (fhi < 0) {
    lo = hi;
    flo = fhi;
    step *= 2;
    hi = lo + step;
    fhi = f(hi);
    if (hi > 1e9) throw new RangeError(`no threshold below 1e9 reaches ARL ${targetArl}`);
  }
  let side = 0;
  for (let iteration = 0; iteration < 200; iteration++) {
    const h = (lo * fhi - hi * flo) / (fhi - flo);
    const fh = f(h);
    if (Math.abs(fh) < tolerance || hi - lo < tolerance * hi) return h;
    if (fh < 0) {
      lo = h;
      flo = fh;
      if (side === -1) fhi /= 2;
      side = -1;
    } else {
      hi = h;
      fhi = fh;
      if (side === 1) flo /= 2;
      side = 1;
    }
  }
  return (lo + hi) / 2;
}
