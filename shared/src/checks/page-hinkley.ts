/**
 * Page–Hinkley drift check on the NIS, an alternative to the CUSUM object.
 *
 * Method: Hinkley, "Inference about the change-point from cumulative sum tests",
 * Biometrika 58 (1971) 509–523, after Page (1954); in the form of Basseville &
 * Nikiforov, "Detection of Abrupt Changes: Theory and Application" (Prentice
 * Hall, 1993), §2.2, for a change of the mean of ε_k from μ₀ by at least δ:
 *   U_k = Σ_{j≤k} (ε_j − μ₀ − δ⁺/2),  M_k = min_{j≤k} U_j,   increase when U_k − M_k > λ⁺
 *   V_k = Σ_{j≤k} (ε_j − μ₀ + δ⁻/2),  W_k = max_{j≤k} V_j,   decrease when W_k − V_k > λ⁻
 * with μ₀ = m, the mean NIS of a consistent filter. The change time is estimated
 * by the last time the extremum was reached (Hinkley 1971).
 *
 * Differences from the CUSUM object: the parameters are mean shifts δ of the
 * NIS rather than likelihood-ratio scale changes, and the test is not restarted
 * on a signal: it reports 'inconsistent' for as long as U − M (or W − V) stays
 * above λ, and clears by itself once the NIS is back to normal long enough.
 * Only the differences U − M and W − V are kept (they obey the recursion
 * D_k = max(0, D_{k−1} + ε_k − μ₀ − δ/2)), so long streams lose no precision.
 * λ⁺ and λ⁻ come from a target in-control ARL exactly as for the CUSUM: the
 * Brook & Evans (1972) Markov chain on χ²_m, each side at 2·ARL0.
 */
import { cusumArl, cusumThresholdForArl, combinedArl, DEFAULT_ARL_STATES } from './cusum-arl';
import { lowerIncrementCdf, upperIncrementCdf } from './cusum';
import { CheckpointError, Severity, Verdict, expectInteger, expectKind, expectNumberArray, verdictOf } from './verdict';

export interface PageHinkleyConfig {
  /** μ₀, the in-control mean (m for the NIS). */
  mu0: number;
  /** δ⁺, smallest increase of the mean worth detecting. */
  deltaUp: number;
  /** δ⁻, smallest decrease of the mean worth detecting (0 < δ⁻ < μ₀ for a NIS). */
  deltaDown: number;
  lambdaUp: number;
  lambdaDown: number;
}

export interface PageHinkleyDesign extends PageHinkleyConfig {
  m: number;
  arl0: number;
  arlUp: number;
  arlDown: number;
  arlCombined: number;
}

const designCache = new Map<string, PageHinkleyDesign>();

/**
 * λ⁺, λ⁻ for a target in-control ARL of the pair, for NIS of dimension m;
 * defaults δ⁺ = m (mean NIS doubled) and δ⁻ = m/2 (mean NIS halved). Memoized.
 */
export function designPageHinkley(input: { m: number; arl0: number; deltaUp?: number; deltaDown?: number; states?: number }): PageHinkleyDesign {
  const { m, arl0 } = input;
  const deltaUp = input.deltaUp ?? m;
  const deltaDown = input.deltaDown ?? m / 2;
  const states = input.states ?? DEFAULT_ARL_STATES;
  if (!Number.isInteger(m) || m < 1) throw new RangeError(`m must be a positive integer, got ${m}`);
  if (!(deltaUp > 0)) throw new RangeError(`deltaUp must be > 0, got ${deltaUp}`);
  if (!(deltaDown > 0 && deltaDown < 2 * m)) throw new RangeError(`deltaDown must be in (0, 2m), got ${deltaDown}`);
  const key = `${m}|${arl0}|${deltaUp}|${deltaDown}|${states}`;
  const cached = designCache.get(key);
  if (cached) return cached;
  const kUp = m + deltaUp / 2;
  const kDown = m - deltaDown / 2;
  const scale = Math.sqrt(2 * m);
  const lambdaUp = cusumThresholdForArl(upperIncrementCdf(m, kUp), 2 * arl0, { states, initialStep: scale });
  const lambdaDown = cusumThresholdForArl(lowerIncrementCdf(m, kDown), 2 * arl0, { states, initialStep: scale });
  const arlUp = cusumArl(upperIncrementCdf(m, kUp), lambdaUp, states);
  const arlDown = cusumArl(lowerIncrementCdf(m, kDown), lambdaDown, states);
  const design: PageHinkleyDesign = Object.freeze({
    m,
    arl0,
    mu0: m,
    deltaUp,
    deltaDown,
    lambdaUp,
    lambdaDown,
    arlUp,
    arlDown,
    arlCombined: combinedArl(arlUp, arlDown),
  });
  if (designCache.size > 256) designCache.clear();
  designCache.set(key, design);
  return design;
}

export interface PageHinkleyState {
  kind: 'page-hinkley';
  version: 1;
  config: PageHinkleyConfig;
  /** [U − M, W − V] */
  D: [number, number];
  samples: number;
  /** Seq of the first sample after the last extremum of U and of V (−1 if at the extremum). */
  onsetSeq: [number, number];
  signalsUp: number;
  signalsDown: number;
  /** Whether each side is currently above its threshold. */
  active: [boolean, boolean];
  /** Whether each side has come back to zero since its last signal. */
  armed: [boolean, boolean];
}

export interface PageHinkleyEvidence {
  verdict: Verdict;
  samples: number;
  up: { statistic: number; threshold: number; delta: number; signals: number; onsetSeq: number | null };
  down: { statistic: number; threshold: number; delta: number; signals: number; onsetSeq: number | null };
  mu0: number;
}

export class PageHinkleyTest {
  readonly config: Readonly<PageHinkleyConfig>;
  private dUp = 0;
  private dDown = 0;
  private samples = 0;
  private onsetUp = -1;
  private onsetDown = -1;
  private signalsUp = 0;
  private signalsDown = 0;
  private activeUp = false;
  private activeDown = false;
  private armedUp = true;
  private armedDown = true;

  constructor(config: PageHinkleyConfig) {
    for (const key of ['mu0', 'deltaUp', 'deltaDown', 'lambdaUp', 'lambdaDown'] as const) {
      if (!Number.isFinite(config[key])) throw new RangeError(`${key} must be finite, got ${config[key]}`);
    }
    if (!(config.deltaUp > 0) || !(config.deltaDown > 0)) throw new RangeError('deltaUp and deltaDown must be > 0');
    if (!(config.lambdaUp >= 0) || !(config.lambdaDown >= 0)) throw new RangeError('lambdaUp and lambdaDown must be ≥ 0');
    this.config = Object.freeze({ ...config });
  }

  /** Adds one value; O(1). */
  push(x: number, seq: number): void {
    const c = this.config;
    this.samples++;
    // U_k − M_k = max(0, U_{k−1} − M_{k−1} + x − μ₀ − δ⁺/2)
    const up = this.dUp + x - c.mu0 - c.deltaUp / 2;
    if (up > 0) {
      if (this.dUp === 0) this.onsetUp = seq;
      this.dUp = up;
    } else {
      this.dUp = 0;
      this.onsetUp = -1;
    }
    // W_k − V_k = max(0, W_{k−1} − V_{k−1} − (x − μ₀ + δ⁻/2))
    const down = this.dDown - (x - c.mu0 + c.deltaDown / 2);
    if (down > 0) {
      if (this.dDown === 0) this.onsetDown = seq;
      this.dDown = down;
    } else {
      this.dDown = 0;
      this.onsetDown = -1;
    }
    // A signal is counted once per excursion: crossing λ again before the
    // statistic has come back to zero is the same change, not a new one.
    const nowUp = this.dUp > c.lambdaUp;
    const nowDown = this.dDown > c.lambdaDown;
    if (nowUp && !this.activeUp && this.armedUp) {
      this.signalsUp++;
      this.armedUp = false;
    }
    if (nowDown && !this.activeDown && this.armedDown) {
      this.signalsDown++;
      this.armedDown = false;
    }
    if (this.dUp === 0) this.armedUp = true;
    if (this.dDown === 0) this.armedDown = true;
    this.activeUp = nowUp;
    this.activeDown = nowDown;
  }

  severity(): Severity {
    return this.activeUp || this.activeDown ? 2 : 0;
  }

  /** U − M and W − V. */
  get statistics(): { up: number; down: number } {
    return { up: this.dUp, down: this.dDown };
  }

  verdict(): Verdict {
    return verdictOf(this.severity());
  }

  evidence(): PageHinkleyEvidence {
    const c = this.config;
    return {
      verdict: this.verdict(),
      samples: this.samples,
      up: { statistic: this.dUp, threshold: c.lambdaUp, delta: c.deltaUp, signals: this.signalsUp, onsetSeq: this.onsetUp >= 0 ? this.onsetUp : null },
      down: {
        statistic: this.dDown,
        threshold: c.lambdaDown,
        delta: c.deltaDown,
        signals: this.signalsDown,
        onsetSeq: this.onsetDown >= 0 ? this.onsetDown : null,
      },
      mu0: c.mu0,
    };
  }

  serialize(): PageHinkleyState {
    return {
      kind: 'page-hinkley',
      version: 1,
      config: { ...this.config },
      D: [this.dUp, this.dDown],
      samples: this.samples,
      onsetSeq: [this.onsetUp, this.onsetDown],
      signalsUp: this.signalsUp,
      signalsDown: this.signalsDown,
      active: [this.activeUp, this.activeDown],
      armed: [this.armedUp, this.armedDown],
    };
  }

  static restore(state: unknown): PageHinkleyTest {
    const s = expectKind(state, 'page-hinkley', 1);
    const config = s['config'] as PageHinkleyConfig;
    if (typeof config !== 'object' || config === null) throw new CheckpointError('page-hinkley: missing config');
    const test = new PageHinkleyTest(config);
    const D = expectNumberArray(s['D'], 2, 'page-hinkley D');
    if (!(D[0] >= 0 && D[1] >= 0)) throw new CheckpointError('page-hinkley D: statistics must be ≥ 0');
    test.dUp = D[0];
    test.dDown = D[1];
    const MAX = Number.MAX_SAFE_INTEGER;
    test.samples = expectInteger(s['samples'], 0, MAX, 'page-hinkley samples');
    const onset = expectNumberArray(s['onsetSeq'], 2, 'page-hinkley onsetSeq');
    test.onsetUp = expectInteger(onset[0], -1, MAX, 'page-hinkley onsetSeq');
    test.onsetDown = expectInteger(onset[1], -1, MAX, 'page-hinkley onsetSeq');
    test.signalsUp = expectInteger(s['signalsUp'], 0, MAX, 'page-hinkley signalsUp');
    test.signalsDown = expectInteger(s['signalsDown'], 0, MAX, 'page-hinkley signalsDown');
    const active = s['active'];
    if (!Array.isArray(active) || active.length !== 2 || typeof active[0] !== 'boolean' || typeof active[1] !== 'boolean') {
      throw new CheckpointError('page-hinkley active: expected two booleans');
    }
    test.activeUp = active[0];
    test.activeDown = active[1];
    const armed = s['armed'];
    if (!Array.isArray(armed) || armed.length !== 2 || typeof armed[0] !== 'boolean' || typeof armed[1] !== 'boolean') {
      throw new CheckpointError('page-hinkley armed: expected two booleans');
    }
    test.armedUp = armed[0];
    test.armedDown = armed[1];
    return test;
  }
}
