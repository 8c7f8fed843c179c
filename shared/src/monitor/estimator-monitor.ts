/**
 * EstimatorMonitor: every consistency and drift check of one estimator, fed one
 * innovation sample at a time, with one verdict and the evidence behind it.
 *
 * Checks and their sources (each module names its method):
 * - NIS window test and NEES window test: Bar-Shalom, Li & Kirubarajan (2001), §5.4;
 * - bias test on the whitened innovation: ibid., with Bonferroni over components;
 * - whiteness: normalized autocorrelation with ±z/√N bounds (ibid.) and
 *   Ljung & Box (1978);
 * - drift: two-sided CUSUM on the NIS (Page 1954) with thresholds from a target
 *   in-control ARL (Brook & Evans 1972), and/or Page–Hinkley (Hinkley 1971);
 * - sequence: gaps, duplicates, late samples (RFC 4303 / RFC 6479 window).
 *
 * Combined verdict: the worst of the checks that have evidence (window tests
 * only once their window is full; the NEES test only when `neesInVerdict`,
 * see there why it is evidence-only by default). 'inconsistent' when a window test rejects
 * at `alpha` or a drift detector has signalled within `holdSamples`; 'marginal'
 * when a window test rejects only at `alphaMarginal`, or a sequence event is
 * recent. The estimator's p-value for fleet-wide control (Benjamini–Hochberg)
 * is the Bonferroni-adjusted minimum of its window tests' p-values.
 *
 * Cost per sample: validation O(m²), Cholesky O(m³), whitening O(m²), window
 * tests O(m), whiteness O(L·m); no allocation on the `ingest`/`update` path once
 * the first sample has fixed the dimensions. State serializes to plain JSON and
 * restores exactly.
 */
import { BiasEvidence, BiasTest } from '../checks/bias-test';
import { ChiSquareWindowEvidence, ChiSquareWindowTest } from '../checks/chi-square-window-test';
import { CusumEvidence, TwoSidedCusum, designNisCusum } from '../checks/cusum';
import { PageHinkleyEvidence, PageHinkleyTest, designPageHinkley } from '../checks/page-hinkley';
import { SequenceCheck, SequenceEvidence, SequenceOutcome, isAccepted } from '../checks/sequence-check';
import { CheckpointError, Severity, Verdict, expectInteger, expectKind, verdictOf } from '../checks/verdict';
import { WhitenessEvidence, WhitenessTest } from '../checks/whiteness-test';
import { whitenedQuadraticForm } from '../linalg/small-kernels';
import {
  DEFAULT_MAX_DIMENSION,
  DEFAULT_PIVOT_TOLERANCE,
  DEFAULT_SYMMETRY_TOLERANCE,
  InnovationSample,
  InnovationSampleError,
  ResolvedValidationOptions,
  allocateInnovationSample,
  readInnovationSampleInto,
  resolveValidationOptions,
  validateInnovationSample,
} from '../sample/innovation-sample';

// Builtins used per sample, bound once: looking up the global `Math`/`Number`
// on every call is slow in sandboxed runners (jest's vm contexts, nodejs/node#49283).
const { isFinite } = Number;
const { isArray } = Array;
const { isView } = ArrayBuffer;

export type DriftDetector = 'cusum' | 'page-hinkley' | 'both';

export interface EstimatorMonitorConfig {
  /** N, samples per window of the window tests (default 100). */
  windowLength: number;
  /**
   * Strict significance: rejection ⇒ 'inconsistent' (default 0.001).
   * The window tests are evaluated at every sample on a sliding window, so a
   * healthy estimator's chance of being flagged at some moment grows with time
   * (roughly α per window length, clustered); hence smaller defaults than the
   * textbook 5 %. Fleet-wide control goes through the p-values (Benjamini–Hochberg).
   */
  alpha: number;
  /** Marginal significance: rejection ⇒ 'marginal' (default 0.01). */
  alphaMarginal: number;
  /** L, largest autocorrelation lag of the whiteness test (default 10). */
  lags: number;
  /** Which drift detector(s) run (default 'cusum'). */
  drift: DriftDetector;
  /** Target in-control average run length of the drift detector, in samples (default 10000). */
  arl0: number;
  /** Designed NIS scale changes of the CUSUM (defaults 2 and 0.5). */
  cusumShiftUp: number;
  cusumShiftDown: number;
  /** Page–Hinkley: detect the mean NIS multiplied by these (defaults 2 and 0.5). */
  pageHinkleyShiftUp: number;
  pageHinkleyShiftDown: number;
  /**
   * NEES: use every neesStride-th sample that carries a reference error (default 1).
   * The χ²_{N·n} bounds need independent NEES values: the same time step of N
   * independent runs (Bar-Shalom et al. 2001, §5.4.2), or values further apart
   * than the estimation error's correlation time. Consecutive NEES values of one
   * run are positively correlated (e = x − x̂ changes slowly), which leaves the
   * mean of the window sum right but widens its spread far beyond χ²_{N·n}.
   */
  neesStride: number;
  /**
   * Whether the NEES test takes part in the verdict and the p-value (default
   * false: reported as evidence only, because of the correlation above). Set it
   * true with a stride beyond the correlation time, or when each sample comes
   * from an independent run.
   */
  neesInVerdict: boolean;
  /** Samples a CUSUM signal keeps the verdict 'inconsistent' (default windowLength). */
  holdSamples: number;
  /** Sequence numbers remembered for duplicate/late detection (default 1024). */
  sequenceWindow: number;
  /** Validation tolerances (see innovation-sample.ts). */
  symmetryTolerance: number;
  pivotTolerance: number;
  maxDimension: number;
  /** Measurement dimension m; null: fixed by the first sample. */
  m: number | null;
  /** Reference-error dimension n; null: fixed by the first sample that carries e. */
  n: number | null;
}

export const DEFAULT_MONITOR_CONFIG: Readonly<Omit<EstimatorMonitorConfig, 'holdSamples'>> = Object.freeze({
  windowLength: 100,
  alpha: 0.001,
  alphaMarginal: 0.01,
  lags: 10,
  drift: 'cusum',
  arl0: 10000,
  cusumShiftUp: 2,
  cusumShiftDown: 0.5,
  pageHinkleyShiftUp: 2,
  pageHinkleyShiftDown: 0.5,
  neesStride: 1,
  neesInVerdict: false,
  sequenceWindow: 1024,
  symmetryTolerance: DEFAULT_SYMMETRY_TOLERANCE,
  pivotTolerance: DEFAULT_PIVOT_TOLERANCE,
  maxDimension: DEFAULT_MAX_DIMENSION,
  m: null,
  n: null,
});

/** Fills defaults and checks ranges; throws RangeError naming the bad setting. */
export function resolveMonitorConfig(config: Partial<EstimatorMonitorConfig> = {}): EstimatorMonitorConfig {
  const c: EstimatorMonitorConfig = {
    ...DEFAULT_MONITOR_CONFIG,
    holdSamples: config.windowLength ?? DEFAULT_MONITOR_CONFIG.windowLength,
    ...stripUndefined(config),
  };
  if (!Number.isInteger(c.windowLength) || c.windowLength < 3) throw new RangeError(`windowLength must be an integer ≥ 3, got ${c.windowLength}`);
  if (!(c.alpha > 0 && c.alpha < 1)) throw new RangeError(`alpha must be in (0, 1), got ${c.alpha}`);
  if (!(c.alphaMarginal >= c.alpha && c.alphaMarginal < 1)) throw new RangeError(`alphaMarginal must be in [alpha, 1), got ${c.alphaMarginal}`);
  if (!Number.isInteger(c.lags) || c.lags < 1 || c.lags >= c.windowLength) {
    throw new RangeError(`lags must be an integer in [1, windowLength − 1], got ${c.lags}`);
  }
  if (c.drift !== 'cusum' && c.drift !== 'page-hinkley' && c.drift !== 'both') throw new RangeError(`drift must be 'cusum', 'page-hinkley' or 'both', got ${String(c.drift)}`);
  if (!(c.arl0 > 1) || !Number.isFinite(c.arl0)) throw new RangeError(`arl0 must be finite and > 1, got ${c.arl0}`);
  if (!(c.cusumShiftUp > 1)) throw new RangeError(`cusumShiftUp must be > 1, got ${c.cusumShiftUp}`);
  if (!(c.cusumShiftDown > 0 && c.cusumShiftDown < 1)) throw new RangeError(`cusumShiftDown must be in (0, 1), got ${c.cusumShiftDown}`);
  if (!(c.pageHinkleyShiftUp > 1)) throw new RangeError(`pageHinkleyShiftUp must be > 1, got ${c.pageHinkleyShiftUp}`);
  if (!(c.pageHinkleyShiftDown > 0 && c.pageHinkleyShiftDown < 1)) {
    throw new RangeError(`pageHinkleyShiftDown must be in (0, 1), got ${c.pageHinkleyShiftDown}`);
  }
  if (!Number.isInteger(c.neesStride) || c.neesStride < 1) throw new RangeError(`neesStride must be a positive integer, got ${c.neesStride}`);
  if (typeof c.neesInVerdict !== 'boolean') throw new RangeError(`neesInVerdict must be a boolean, got ${String(c.neesInVerdict)}`);
  if (!Number.isInteger(c.holdSamples) || c.holdSamples < 0) throw new RangeError(`holdSamples must be an integer ≥ 0, got ${c.holdSamples}`);
  resolveValidationOptions(c);
  for (const key of ['m', 'n'] as const) {
    const v = c[key];
    if (v !== null && (!Number.isInteger(v) || v < 1 || v > c.maxDimension)) {
      throw new RangeError(`${key} must be null or an integer in [1, maxDimension], got ${v}`);
    }
  }
  return c;
}

function stripUndefined<T extends object>(o: T): Partial<T> {
  const out: Partial<T> = {};
  for (const [k, v] of Object.entries(o)) if (v !== undefined) (out as Record<string, unknown>)[k] = v;
  return out;
}

export interface EstimatorChecksEvidence {
  nis: ChiSquareWindowEvidence;
  /** null until a sample with a reference error has arrived. */
  nees: ChiSquareWindowEvidence | null;
  bias: BiasEvidence;
  whiteness: WhitenessEvidence;
  cusum: CusumEvidence | null;
  pageHinkley: PageHinkleyEvidence | null;
  sequence: SequenceEvidence;
}

export interface CheckVerdicts {
  nis: Verdict;
  nees: Verdict | null;
  bias: Verdict;
  whiteness: Verdict;
  cusum: Verdict | null;
  pageHinkley: Verdict | null;
  sequence: Verdict;
}

export interface EstimatorReport {
  verdict: Verdict;
  /** One line per check that is not 'consistent', worst first. */
  reasons: string[];
  /** Samples accepted into the statistical checks. */
  samples: number;
  m: number | null;
  n: number | null;
  last: { seq: number; t: number | null; nis: number; nees: number | null } | null;
  /** Bonferroni-adjusted minimum p-value of the ready window tests (1 if none): the input to Benjamini–Hochberg. */
  pValue: number;
  /** null before the first sample (when m was not configured). */
  checks: EstimatorChecksEvidence | null;
}

export interface EstimatorMonitorState {
  kind: 'estimator-monitor';
  version: 1;
  config: EstimatorMonitorConfig;
  m: number | null;
  n: number | null;
  samples: number;
  /** Samples with a reference error seen (for the NEES stride). */
  neesCounter: number;
  last: { seq: number; t: number | null; nis: number; nees: number | null; exceeded?: boolean } | null;
  checks: {
    nis: unknown;
    nees: unknown | null;
    bias: unknown;
    whiteness: unknown;
    cusum: unknown | null;
    pageHinkley: unknown | null;
    sequence: unknown;
  } | null;
}

interface Checks {
  nis: ChiSquareWindowTest;
  bias: BiasTest;
  whiteness: WhitenessTest;
  cusum: TwoSidedCusum | null;
  pageHinkley: PageHinkleyTest | null;
  sequence: SequenceCheck;
}

export class EstimatorMonitor {
  readonly config: Readonly<EstimatorMonitorConfig>;
  private readonly validation: ResolvedValidationOptions;
  private m = 0;
  private n = 0;
  private checks: Checks | null = null;
  private nees: ChiSquareWindowTest | null = null;
  private samples = 0;
  private lastSeq = -1;
  private lastT: number | undefined = undefined;
  private lastNis = NaN;
  private lastNees = NaN;
  private sampleNis = NaN;
  private lastExceededFlag = false;
  private neesCounter = 0;
  // scratch, allocated when the dimensions are fixed
  private sample: InnovationSample | null = null;
  private scratch = new Float64Array(0);
  private w = new Float64Array(0);
  private eWhite = new Float64Array(0);

  private static restoring = false;

  /** The highest sequence number the checks have seen (−1 before any sample). */
  get highestSeq(): number {
    return this.checks ? this.checks.sequence.highestSeq : -1;
  }

  /**
   * Samples known to be stored already but not seen by these checks: those committed after
   * the checkpoint these checks were restored from, before the service stopped without
   * saving again. The sequence check takes their numbers (so a unit that does not resend
   * them, having had them acknowledged, leaves no false gap, and a resend of one counts
   * as a duplicate); the statistical windows do not get them (their innovation
   * covariances are not stored). Samples in ascending `seq`; returns how many were new.
   */
  markStored(stored: readonly { seq: number; t: number }[]): number {
    const checks = this.checks;
    if (!checks) return 0;
    let taken = 0;
    for (const { seq, t } of stored) {
      if (!isAccepted(checks.sequence.observe(seq))) continue;
      taken += 1;
      this.lastSeq = seq;
      if (this.lastT === undefined || t > this.lastT) this.lastT = t;
    }
    return taken;
  }

  constructor(config: Partial<EstimatorMonitorConfig> = {}) {
    this.config = Object.freeze(resolveMonitorConfig(config));
    this.validation = resolveValidationOptions(this.config);
    if (EstimatorMonitor.restoring) return;
    if (this.config.m !== null) this.initialize(this.config.m);
    if (this.config.n !== null) this.initializeNees(this.config.n);
  }

  /** Measurement dimension, or 0 before it is known. */
  get dimension(): number {
    return this.m;
  }

  /**
   * Validates a plain parsed sample and updates every check. Throws
   * InnovationSampleError when the sample is invalid (nothing is updated then).
   * Returns how the sequence number was classified; only 'in_order', 'gap' and
   * 'restart' samples reach the statistical checks. No allocation once the
   * dimensions are fixed.
   */
  ingest(raw: unknown): SequenceOutcome {
    if (this.sample === null) {
      // The first sample fixes m: validate it in full first, so that an invalid
      // one cannot fix a wrong dimension (throws InnovationSampleError).
      this.initialize(validateInnovationSample(raw, this.validation).m);
    }
    const sample = this.sample as InnovationSample;
    if (this.n === 0) {
      // e's size is not fixed yet: make room for this sample's e (allocates once)
      const n = peekLength(raw, 'e');
      if (n > sample.e.length && n <= this.validation.maxDimension) this.reserveReferenceError(n);
    }
    readInnovationSampleInto(raw, sample, this.m, this.n, this.validation, this.scratch);
    return this.update(sample);
  }

  /** Updates every check with an already validated sample. */
  update(sample: InnovationSample): SequenceOutcome {
    if (this.checks === null) this.initialize(sample.m);
    const checks = this.checks as Checks;
    const m = this.m;
    if (sample.m !== m) {
      throw new InnovationSampleError('dimension_mismatch', 'nu', `nu has ${sample.m} components but this estimator's measurement has ${m}`);
    }
    if (sample.n > 0 && this.n > 0 && sample.n !== this.n) {
      throw new InnovationSampleError('dimension_mismatch', 'e', `e has ${sample.n} components but this estimator's reference error has ${this.n}`);
    }
    // NIS = ν'S⁻¹ν = ‖L⁻¹ν‖², with w = L⁻¹ν kept for the bias and whiteness tests
    const nis = whitenedQuadraticForm(sample.L, m, sample.nu, this.w);
    if (!isFinite(nis)) throw new InnovationSampleError('not_finite', 'nu', `the NIS of this sample overflows (${nis})`);
    let nees = NaN;
    if (sample.n > 0) {
      if (this.eWhite.length < sample.n) this.reserveReferenceError(sample.n);
      // NEES = e'P⁻¹e = ‖L_P⁻¹e‖²
      nees = whitenedQuadraticForm(sample.LP, sample.n, sample.e, this.eWhite);
      if (!isFinite(nees)) throw new InnovationSampleError('not_finite', 'e', `the NEES of this sample overflows (${nees})`);
    }
    this.sampleNis = nis;
    // A number at or below the highest seen but stamped later than the last sample is a
    // counter that started again (a unit restarted), not a resend: a resend carries its
    // original time.
    const restarted =
      sample.t !== undefined && this.lastT !== undefined && sample.t > this.lastT && sample.seq <= checks.sequence.highestSeq;
    const outcome = restarted ? checks.sequence.restart(sample.seq) : checks.sequence.observe(sample.seq);
    if (!isAccepted(outcome)) return outcome;
    if (sample.n > 0 && this.nees === null) this.initializeNees(sample.n);
    checks.nis.push(nis);
    checks.bias.push(this.w);
    checks.whiteness.push(this.w);
    if (checks.cusum !== null) checks.cusum.push(nis, sample.seq);
    if (checks.pageHinkley !== null) checks.pageHinkley.push(nis, sample.seq);
    if (sample.n > 0) {
      // every neesStride-th sample with a reference error
      if (this.neesCounter % this.config.neesStride === 0) (this.nees as ChiSquareWindowTest).push(nees);
      this.neesCounter++;
    }
    this.lastExceededFlag = checks.nis.isExceedance(nis);
    this.samples++;
    this.lastSeq = sample.seq;
    this.lastT = sample.t;
    this.lastNis = nis;
    this.lastNees = nees;
    return outcome;
  }

  /** The current combined verdict (cheap: no distribution functions). */
  get verdict(): Verdict {
    return verdictOf(this.severity());
  }

  /**
   * Each check's current verdict, from cached bounds only (cheap enough to call
   * per sample, e.g. for per-check status on a screen); null for checks that do
   * not run. The NEES verdict is given even when it stays out of the combined one.
   */
  checkVerdicts(): CheckVerdicts | null {
    const checks = this.checks;
    if (checks === null) return null;
    return {
      nis: checks.nis.verdict(),
      nees: this.nees === null ? null : this.nees.verdict(),
      bias: checks.bias.verdict(),
      whiteness: checks.whiteness.verdict(),
      cusum: checks.cusum === null ? null : checks.cusum.verdict(),
      pageHinkley: checks.pageHinkley === null ? null : checks.pageHinkley.verdict(),
      sequence: checks.sequence.verdict(),
    };
  }

  /**
   * Whether the NIS of the last accepted sample fell outside its single-sample
   * two-sided interval [χ²_m⁻¹(α′/2), χ²_m⁻¹(1 − α′/2)], α′ = alphaMarginal.
   */
  get lastExceeded(): boolean {
    return this.lastExceededFlag;
  }

  /**
   * The drift statistics for a trace: G⁺ and G⁻ of the CUSUM, or, when only
   * Page–Hinkley runs, its U − M and W − V; zeros before the first sample.
   */
  cusumStatistics(): { up: number; down: number } {
    const checks = this.checks;
    if (checks === null) return { up: 0, down: 0 };
    if (checks.cusum !== null) return checks.cusum.statistics;
    if (checks.pageHinkley !== null) return checks.pageHinkley.statistics;
    return { up: 0, down: 0 };
  }

  /** NIS of the last sample given to ingest/update, accepted or not (NaN before any). */
  get lastNormalizedInnovationSquared(): number {
    return this.sampleNis;
  }

  /** The whitened innovation L⁻¹ν of the last sample that reached update (first m entries; a live view). */
  get lastWhitenedInnovation(): Float64Array {
    return this.w;
  }

  /** The verdict, every check's evidence and the estimator's p-value. */
  report(): EstimatorReport {
    const checks = this.checks;
    const last =
      this.samples > 0
        ? { seq: this.lastSeq, t: this.lastT ?? null, nis: this.lastNis, nees: Number.isNaN(this.lastNees) ? null : this.lastNees }
        : null;
    if (checks === null) {
      return { verdict: 'consistent', reasons: [], samples: 0, m: null, n: null, last, pValue: 1, checks: null };
    }
    const evidence: EstimatorChecksEvidence = {
      nis: checks.nis.evidence(),
      nees: this.nees === null ? null : this.nees.evidence(),
      bias: checks.bias.evidence(),
      whiteness: checks.whiteness.evidence(),
      cusum: checks.cusum === null ? null : checks.cusum.evidence(),
      pageHinkley: checks.pageHinkley === null ? null : checks.pageHinkley.evidence(),
      sequence: checks.sequence.evidence(),
    };
    return {
      verdict: this.verdict,
      reasons: describeReasons(evidence, this.config.neesInVerdict),
      samples: this.samples,
      m: this.m,
      n: this.n > 0 ? this.n : null,
      last,
      pValue: this.pValue(),
      checks: evidence,
    };
  }

  /** Bonferroni-adjusted minimum p-value over the window tests that are ready (1 when none is). */
  pValue(): number {
    const checks = this.checks;
    if (checks === null) return 1;
    let k = 0;
    let minP = 1;
    const consider = (ready: boolean, p: () => number): void => {
      if (!ready) return;
      k++;
      const value = p();
      if (value < minP) minP = value;
    };
    consider(checks.nis.ready, () => checks.nis.pValue());
    if (this.nees !== null && this.config.neesInVerdict) {
      const nees = this.nees;
      consider(nees.ready, () => nees.pValue());
    }
    consider(checks.bias.ready, () => checks.bias.pValue());
    consider(checks.whiteness.ready, () => checks.whiteness.pValue());
    return k === 0 ? 1 : Math.min(1, k * minP);
  }

  serialize(): EstimatorMonitorState {
    const checks = this.checks;
    return {
      kind: 'estimator-monitor',
      version: 1,
      config: { ...this.config },
      m: this.m > 0 ? this.m : null,
      n: this.n > 0 ? this.n : null,
      samples: this.samples,
      neesCounter: this.neesCounter,
      last:
        this.samples > 0
          ? {
              seq: this.lastSeq,
              t: this.lastT ?? null,
              nis: this.lastNis,
              nees: Number.isNaN(this.lastNees) ? null : this.lastNees,
              exceeded: this.lastExceededFlag,
            }
          : null,
      checks:
        checks === null
          ? null
          : {
              nis: checks.nis.serialize(),
              nees: this.nees === null ? null : this.nees.serialize(),
              bias: checks.bias.serialize(),
              whiteness: checks.whiteness.serialize(),
              cusum: checks.cusum === null ? null : checks.cusum.serialize(),
              pageHinkley: checks.pageHinkley === null ? null : checks.pageHinkley.serialize(),
              sequence: checks.sequence.serialize(),
            },
    };
  }

  static restore(state: unknown): EstimatorMonitor {
    const s = expectKind(state, 'estimator-monitor', 1);
    const config = s['config'] as EstimatorMonitorConfig;
    if (typeof config !== 'object' || config === null) throw new CheckpointError('estimator-monitor: missing config');
    let monitor: EstimatorMonitor;
    EstimatorMonitor.restoring = true;
    try {
      monitor = new EstimatorMonitor(config);
    } finally {
      EstimatorMonitor.restoring = false;
    }
    const m = s['m'] === null ? 0 : expectInteger(s['m'], 1, config.maxDimension, 'estimator-monitor m');
    const n = s['n'] === null ? 0 : expectInteger(s['n'], 1, config.maxDimension, 'estimator-monitor n');
    monitor.samples = expectInteger(s['samples'], 0, Number.MAX_SAFE_INTEGER, 'estimator-monitor samples');
    monitor.neesCounter = expectInteger(s['neesCounter'], 0, Number.MAX_SAFE_INTEGER, 'estimator-monitor neesCounter');
    const last = s['last'] as EstimatorMonitorState['last'];
    if (last !== null && last !== undefined) {
      monitor.lastSeq = expectInteger(last.seq, 0, Number.MAX_SAFE_INTEGER, 'estimator-monitor last.seq');
      monitor.lastT = last.t === null ? undefined : last.t;
      monitor.lastNis = last.nis;
      monitor.lastNees = last.nees === null ? NaN : last.nees;
      monitor.lastExceededFlag = last.exceeded === true;
    }
    const checks = s['checks'] as EstimatorMonitorState['checks'];
    if (m > 0) {
      if (checks === null || checks === undefined) throw new CheckpointError('estimator-monitor: m is set but the checks are missing');
      monitor.allocate(m);
      monitor.checks = {
        nis: ChiSquareWindowTest.restore(checks.nis),
        bias: BiasTest.restore(checks.bias),
        whiteness: WhitenessTest.restore(checks.whiteness),
        cusum: checks.cusum === null ? null : TwoSidedCusum.restore(checks.cusum),
        pageHinkley: checks.pageHinkley === null ? null : PageHinkleyTest.restore(checks.pageHinkley),
        sequence: SequenceCheck.restore(checks.sequence),
      };
      if (n > 0) {
        if (checks.nees === null) throw new CheckpointError('estimator-monitor: n is set but the NEES test is missing');
        monitor.reserveReferenceError(n);
        monitor.n = n;
        monitor.nees = ChiSquareWindowTest.restore(checks.nees);
      }
    }
    return monitor;
  }

  // -------------------------------------------------------------------------

  /** The worst severity over the checks, cheapest first, stopping at 2. */
  private severity(): Severity {
    const checks = this.checks;
    if (checks === null) return 0;
    let s: Severity = checks.nis.severity();
    if (s === 2) return 2;
    if (checks.cusum !== null && checks.cusum.severity() === 2) return 2;
    if (checks.pageHinkley !== null && checks.pageHinkley.severity() === 2) return 2;
    const bias = checks.bias.severity();
    if (bias > s) s = bias;
    if (s === 2) return 2;
    if (this.nees !== null && this.config.neesInVerdict) {
      const nees = this.nees.severity();
      if (nees > s) s = nees;
      if (s === 2) return 2;
    }
    const whiteness = checks.whiteness.severity();
    if (whiteness > s) s = whiteness;
    if (s === 0) s = checks.sequence.severity();
    return s;
  }

  private initialize(m: number): void {
    if (!Number.isInteger(m) || m < 1 || m > this.validation.maxDimension) {
      throw new InnovationSampleError('dimension_mismatch', 'nu', `cannot monitor a measurement of ${m} components`);
    }
    const c = this.config;
    const significance = { alpha: c.alpha, alphaMarginal: c.alphaMarginal };
    let cusum: TwoSidedCusum | null = null;
    if (c.drift === 'cusum' || c.drift === 'both') {
      const design = designNisCusum({ m, arl0: c.arl0, shiftUp: c.cusumShiftUp, shiftDown: c.cusumShiftDown });
      cusum = new TwoSidedCusum({ kUp: design.kUp, hUp: design.hUp, kDown: design.kDown, hDown: design.hDown, holdSamples: c.holdSamples });
    }
    let pageHinkley: PageHinkleyTest | null = null;
    if (c.drift === 'page-hinkley' || c.drift === 'both') {
      const design = designPageHinkley({
        m,
        arl0: c.arl0,
        deltaUp: m * (c.pageHinkleyShiftUp - 1),
        deltaDown: m * (1 - c.pageHinkleyShiftDown),
      });
      pageHinkley = new PageHinkleyTest(design);
    }
    this.allocate(m);
    this.checks = {
      nis: new ChiSquareWindowTest({ windowLength: c.windowLength, dofPerSample: m, ...significance }),
      bias: new BiasTest({ windowLength: c.windowLength, m, ...significance }),
      whiteness: new WhitenessTest({ windowLength: c.windowLength, m, lags: c.lags, ...significance }),
      cusum,
      pageHinkley,
      sequence: new SequenceCheck({ window: c.sequenceWindow, recentSamples: c.windowLength }),
    };
  }

  private allocate(m: number): void {
    this.m = m;
    const n = this.eWhite.length;
    this.sample = allocateInnovationSample(m, n);
    const k = Math.max(m, n);
    this.scratch = new Float64Array(k * k + k);
    this.w = new Float64Array(m);
  }

  /** Fixes n and creates the NEES window test. */
  private initializeNees(n: number): void {
    const c = this.config;
    this.reserveReferenceError(n);
    this.n = n;
    this.nees = new ChiSquareWindowTest({ windowLength: c.windowLength, dofPerSample: n, alpha: c.alpha, alphaMarginal: c.alphaMarginal });
  }

  /** Buffers for a reference error of n components (n not fixed yet). */
  private reserveReferenceError(n: number): void {
    if (this.eWhite.length < n) this.eWhite = new Float64Array(n);
    if (this.sample !== null && this.sample.e.length < n) {
      this.sample.e = new Float64Array(n);
      this.sample.LP = new Float64Array(n * n);
    }
    if (this.scratch.length < n * n + n) this.scratch = new Float64Array(n * n + n);
  }
}

/** Length of an array field of a raw sample, or 0 when absent or not an array (validation reports it). */
function peekLength(raw: unknown, field: string): number {
  if (typeof raw !== 'object' || raw === null) return 0;
  const x = (raw as Record<string, unknown>)[field];
  if (isArray(x) || (isView(x) && !(x instanceof DataView))) return (x as ArrayLike<unknown>).length;
  return 0;
}

function fixed(x: number, digits = 3): string {
  return Number.isFinite(x) ? x.toPrecision(digits) : String(x);
}

/** Human-readable reasons, worst first (for alerts and the estimator screen). */
export function describeReasons(e: EstimatorChecksEvidence, includeNees = true): string[] {
  const lines: { severity: number; text: string }[] = [];
  const add = (verdict: Verdict, text: string): void => {
    if (verdict !== 'consistent') lines.push({ severity: verdict === 'inconsistent' ? 2 : 1, text });
  };
  const window = (name: string, w: ChiSquareWindowEvidence): void => {
    if (!w.ready) return;
    const level = w.verdict === 'inconsistent' ? 1 - w.alpha : 1 - w.alphaMarginal;
    const bounds = w.verdict === 'inconsistent' ? w.bounds : w.marginalBounds;
    const direction = w.statistic > bounds.upper ? 'above' : 'below';
    add(
      w.verdict,
      `${name} window: average ${fixed(w.average)} over ${w.samples} samples is ${direction} the ${fixed(100 * level, 4)}% interval ` +
        `[${fixed(bounds.lower / w.samples)}, ${fixed(bounds.upper / w.samples)}] (p = ${fixed(w.pValue, 2)})`,
    );
  };
  window('NIS', e.nis);
  if (e.nees && includeNees) window('NEES', e.nees);
  if (e.bias.ready) {
    e.bias.components.forEach((c, i) => {
      const bound = c.verdict === 'inconsistent' ? c.bound : c.marginalBound;
      add(c.verdict, `bias: mean of whitened component ${i} is ${fixed(c.mean)}, beyond ±${fixed(bound)} (p = ${fixed(c.pValue, 2)})`);
    });
  }
  if (e.whiteness.ready) {
    const w = e.whiteness;
    add(
      w.verdict,
      `whiteness: Ljung–Box Q = ${fixed(w.statistic)} over lags 1–${w.lags} exceeds ${fixed(w.verdict === 'inconsistent' ? w.critical : w.marginalCritical)} ` +
        `(χ²_${w.dof}, p = ${fixed(w.pValue, 2)}); ${w.outsideBound} autocorrelations outside ±${fixed(w.autocorrelationBound)}, ${fixed(w.expectedOutside, 2)} expected`,
    );
  }
  if (e.cusum && e.cusum.lastSignal) {
    const s = e.cusum.lastSignal;
    add(
      e.cusum.verdict,
      `CUSUM: NIS ${s.direction === 'up' ? 'larger' : 'smaller'} than the filter believes, signalled at seq ${s.seq} ` +
        `(${s.samplesAgo} samples ago; change estimated from seq ${s.onsetSeq})`,
    );
  }
  if (e.pageHinkley) {
    const p = e.pageHinkley;
    if (p.up.statistic > p.up.threshold) add(p.verdict, `Page–Hinkley: mean NIS increased (statistic ${fixed(p.up.statistic)} > ${fixed(p.up.threshold)}, since seq ${p.up.onsetSeq})`);
    if (p.down.statistic > p.down.threshold) add(p.verdict, `Page–Hinkley: mean NIS decreased (statistic ${fixed(p.down.statistic)} > ${fixed(p.down.threshold)}, since seq ${p.down.onsetSeq})`);
  }
  if (e.sequence.lastEvent && e.sequence.verdict !== 'consistent') {
    const s = e.sequence;
    add(
      s.verdict,
      `sequence: ${s.lastEvent!.kind.replace('_', ' ')} at seq ${s.lastEvent!.seq}; totals: ${s.lost} missing, ${s.duplicates} duplicate, ${s.late} late, ${s.tooOld} too old, ${s.restarts} restarts`,
    );
  }
  return lines.sort((a, b) => b.severity - a.severity).map((l) => l.text);
}

/** Result of {@link ingestInnovationSample}: never throws for a bad sample. */
export type IngestResult =
  | { ok: true; outcome: SequenceOutcome; verdict: Verdict; nis: number }
  | { ok: false; error: InnovationSampleError };

/**
 * Validates a plain parsed sample and updates the monitor in one call. A bad
 * sample comes back as { ok: false, error } with the error's stable code (what
 * quarantine records); other errors are thrown.
 */
export function ingestInnovationSample(monitor: EstimatorMonitor, raw: unknown): IngestResult {
  try {
    const outcome = monitor.ingest(raw);
    return { ok: true, outcome, verdict: monitor.verdict, nis: monitor.lastNormalizedInnovationSquared };
  } catch (error) {
    if (error instanceof InnovationSampleError) return { ok: false, error };
    throw error;
  }
}
