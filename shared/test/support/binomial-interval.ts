/**
 * Central acceptance region of a Binomial(n, p) count: the smallest lo and
 * largest hi with P(X < lo) ≤ (1 − level)/2 and P(X > hi) ≤ (1 − level)/2.
 * An observed count inside it means p lies within the matching (equal-tailed)
 * binomial confidence interval of the observed rate.
 */
export function binomialAcceptance(n: number, p: number, level = 0.999): { lo: number; hi: number } {
  const tail = (1 - level) / 2;
  const pmf: number[] = [];
  let logf = n * Math.log1p(-p);
  const logRatio = Math.log(p / (1 - p));
  for (let k = 0; k <= n; k++) {
    pmf.push(Math.exp(logf));
    logf += Math.log((n - k) / (k + 1)) + logRatio;
  }
  let lo = 0;
  let below = 0;
  while (lo < n && below + pmf[lo] <= tail) below += pmf[lo++];
  let hi = n;
  let above = 0;
  while (hi > 0 && above + pmf[hi] <= tail) above += pmf[hi--];
  return { lo, hi };
}
