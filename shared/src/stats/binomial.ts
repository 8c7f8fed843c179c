/**
 * Binomial upper tail P(X ≥ k) for X ~ Binomial(N, p), by summing the
 * probability mass function with the recurrence
 *   f(0) = (1 − p)^N,  f(j+1) = f(j)·(N − j)/(j + 1)·p/(1 − p)
 * evaluated in logarithms (Johnson, Kemp & Kotz, "Univariate Discrete Distributions", 3rd ed., 2005,
 * §3.2). O(N); used for evidence only (window exceedance counts), never on the
 * per-sample path.
 */
export function binomialUpperTail(k: number, N: number, p: number): number {
  if (k <= 0) return 1;
  if (k > N) return 0;
  if (p <= 0) return 0;
  if (p >= 1) return 1;
  // Work with log f(j): (1 − p)^N underflows for long windows.
  const logRatio = Math.log(p / (1 - p));
  let logf = N * Math.log1p(-p);
  let below = 0;
  for (let j = 0; j < k; j++) {
    below += Math.exp(logf);
    logf += Math.log((N - j) / (j + 1)) + logRatio;
  }
  const upper = 1 - below;
  return upper < 0 ? 0 : upper > 1 ? 1 : upper;
}
