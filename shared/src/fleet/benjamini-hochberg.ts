/**
 * Fleet-wide false-alarm control over many estimators' p-values.
 *
 * Method: Benjamini & Hochberg, "Controlling the false discovery rate: a
 * practical and powerful approach to multiple testing", J. R. Statist. Soc. B 57
 * (1995) 289–300. With the p-values sorted, p_(1) ≤ … ≤ p_(n), reject the
 * hypotheses of p_(1) … p_(k) for the largest k with
 *   p_(k) ≤ (k/n)·q,
 * which keeps the expected fraction of false alarms among the alarms at most q
 * (for independent or positively dependent tests). The adjusted p-values
 * ("q-values" in the sense of statsmodels' `multipletests(method='fdr_bh')`) are
 *   p̃_(i) = min_{j ≥ i} min(1, n·p_(j)/j),
 * and hypothesis i is rejected exactly when p̃_i ≤ q.
 */

export interface BenjaminiHochbergResult {
  /** Per input, in input order. */
  rejected: boolean[];
  /** Adjusted p-values, in input order. */
  adjusted: number[];
  /** Number of rejections k. */
  rejections: number;
  /** The largest p-value rejected, (k/n)·q bound it met; 0 when nothing is rejected. */
  threshold: number;
}

export function benjaminiHochberg(pValues: readonly number[], q: number): BenjaminiHochbergResult {
  if (!(q > 0 && q < 1)) throw new RangeError(`q must be in (0, 1), got ${q}`);
  const n = pValues.length;
  pValues.forEach((p, i) => {
    if (!(p >= 0 && p <= 1)) throw new RangeError(`p-value ${i} must be in [0, 1], got ${p}`);
  });
  const order = Array.from({ length: n }, (_, i) => i).sort((a, b) => pValues[a] - pValues[b] || a - b);
  // largest k with p_(k) ≤ k·q/n
  let k = 0;
  for (let rank = n; rank >= 1; rank--) {
    if (pValues[order[rank - 1]] <= (rank * q) / n) {
      k = rank;
      break;
    }
  }
  const adjusted = new Array<number>(n);
  let running = 1;
  for (let rank = n; rank >= 1; rank--) {
    const i = order[rank - 1];
    running = Math.min(running, (n * pValues[i]) / rank);
    adjusted[i] = Math.min(1, running);
  }
  const rejected = new Array<boolean>(n).fill(false);
  for (let rank = 1; rank <= k; rank++) rejected[order[rank - 1]] = true;
  return { rejected, adjusted, rejections: k, threshold: k > 0 ? (k * q) / n : 0 };
}

/** One estimator's screening input. */
export interface FleetEntry<K> {
  key: K;
  /** The estimator's p-value (EstimatorReport.pValue). */
  pValue: number;
}

/** The estimators flagged at false discovery rate q, most significant first, with adjusted p-values. */
export function fleetDiscoveries<K>(entries: readonly FleetEntry<K>[], q: number): { key: K; pValue: number; adjusted: number }[] {
  const result = benjaminiHochberg(
    entries.map((e) => e.pValue),
    q,
  );
  return entries
    .map((e, i) => ({ key: e.key, pValue: e.pValue, adjusted: result.adjusted[i], rejected: result.rejected[i] }))
    .filter((e) => e.rejected)
    .sort((a, b) => a.pValue - b.pValue)
    .map(({ key, pValue, adjusted }) => ({ key, pValue, adjusted }));
}
