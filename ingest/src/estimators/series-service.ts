// An estimator's time series for charts: down-sampled on the server to at most the
// points a chart can show (per bucket the NIS minimum, maximum and mean, so extremes are
// kept), with the bands and statistics the charts draw against.
import type { EstimatorSeries } from '../../../shared/src/api/api-types';
import { autocorrelation, chiSquareInterval, designNisCusum, normalQuantile } from '../../../shared/src/index';
import type { EstimatorsRepository } from './estimators-repository';

export interface SeriesSettings {
  windowLength: number;
  alpha: number;
  arl0: number;
  lags: number;
  /** Samples used for the histogram, autocorrelation and bias (the latest in the range). */
  statsSamples: number;
}

/** Ranges this long or longer are drawn from the minute rollups. */
const ROLLUP_RANGE_MS = 6 * 3_600_000;

const HISTOGRAM_EDGES = Array.from({ length: 33 }, (_, i) => -4 + i * 0.25);

export class SeriesService {
  constructor(
    private readonly repo: EstimatorsRepository,
    private readonly settings: SeriesSettings,
  ) {}

  async series(id: number, m: number, fromMs: number, toMs: number, points: number): Promise<EstimatorSeries> {
    let bucketMs = Math.max(1000, Math.ceil((toMs - fromMs) / points));
    // Long ranges read the minute rollups (whole-minute buckets, extremes kept) instead of
    // every sample: a day is 1,440 rollup rows rather than 86,400 samples.
    const fromRollups = toMs - fromMs >= ROLLUP_RANGE_MS;
    if (fromRollups) bucketMs = Math.ceil(bucketMs / 60_000) * 60_000;
    const [buckets, whitened] = await Promise.all([
      fromRollups ? this.repo.rollupBuckets(id, fromMs, toMs, bucketMs) : this.repo.buckets(id, fromMs, toMs, bucketMs),
      this.repo.whitened(id, fromMs, toMs, this.settings.statsSamples),
    ]);
    const { alpha, windowLength: N, arl0, lags } = this.settings;
    // One NIS value ~ χ²_m; the window sum ~ χ²_{N·m} (Bar-Shalom, Li & Kirubarajan 2001, §5.4).
    const single = chiSquareInterval(m, alpha);
    const windowSum = chiSquareInterval(N * m, alpha);
    const cusum = designNisCusum({ m, arl0 });

    // Whitened components, one array each.
    const n = whitened.length;
    const w: Float64Array[] = Array.from({ length: m }, () => new Float64Array(n));
    for (let i = 0; i < n; i++) {
      const buf = whitened[i];
      for (let j = 0; j < m && 4 * j + 3 < buf.length; j++) w[j][i] = buf.readFloatLE(4 * j);
    }
    const counts = w.map((x) => {
      const c = new Array<number>(HISTOGRAM_EDGES.length - 1).fill(0);
      for (const v of x) {
        const k = Math.min(c.length - 1, Math.max(0, Math.floor((v - HISTOGRAM_EDGES[0]) / 0.25)));
        c[k] += 1;
      }
      return c;
    });
    const maxLag = Math.min(lags, Math.max(0, n - 1));
    const acf = w.map((x) => (n > maxLag && maxLag > 0 ? autocorrelation(x, maxLag).slice(1) : []));
    const mean = w.map((x) => (n > 0 ? x.reduce((a, b) => a + b, 0) / n : 0));
    return {
      from: new Date(fromMs).toISOString(),
      to: new Date(toMs).toISOString(),
      bucketMs,
      samples: buckets.reduce((a, b) => a + b.count, 0),
      m,
      points: buckets.map((b) => ({
        t: new Date(fromMs + b.b * bucketMs).toISOString(),
        count: b.count,
        nisMin: b.nis_min,
        nisMax: b.nis_max,
        nisMean: b.nis_mean,
        cusumUp: b.cusum_up,
        cusumDown: b.cusum_down,
      })),
      band: {
        alpha,
        lower: single.lower,
        upper: single.upper,
        windowLength: N,
        windowLower: windowSum.lower / N,
        windowUpper: windowSum.upper / N,
      },
      cusumThreshold: { up: cusum.hUp, down: cusum.hDown },
      histogram: { edges: HISTOGRAM_EDGES, counts },
      // ±z/√n: the bound on a white sequence's autocorrelation at the two-sided level alpha.
      autocorrelation: { lags: Array.from({ length: maxLag }, (_, i) => i + 1), values: acf, bound: n > 0 ? normalQuantile(1 - alpha / 2) / Math.sqrt(n) : 0 },
      // Each component's mean ~ N(0, 1/n) for a consistent filter; Bonferroni over m components.
      bias: { mean, bound: n > 0 ? normalQuantile(1 - alpha / (2 * m)) / Math.sqrt(n) : 0 },
    };
  }
}
