/**
 * Two-sided CUSUM drift check on the NIS.
 *
 * Method: Page, "Continuous inspection schemes", Biometrika 41 (1954) 100–115,
 * in its tabular (two one-sided charts) form:
 *   G⁺_k = max(0, G⁺_{k−1} + ε_k − k⁺)   signals when G⁺_k > h⁺  (noise larger than the filter believes)
 *   G⁻_k = max(0, G⁻_{k−1} + k⁻ − ε_k)   signals when G⁻_k > h⁻  (noise smaller than the filter believes)
 * After a signal both charts restart from zero, so successive false alarms are a
 * renewal process with mean spacing ARL0.
 *
 * Design (no hand-picked numbers):
 * - reference values from the likelihood ratio of a scale change. If the NIS
 *   becomes s·χ²_m instead of χ²_m, the log-likelihood ratio of one sample is
 *   −(m/2)·ln s + (ε/2)(1 − 1/s), which is proportional to ε − k with
 *     k = m·s·ln s / (s − 1)
 *   (the CUSUM of the log-likelihood ratio is optimal for detecting that shift,
 *   Moustakides, Ann. Statist. 14, 1986; Hawkins & Olwell, "Cumulative Sum
 *   Charts and Charting for Quality Improvement", Springer 1998, §6 for the
 *   gamma/chi-square family). Defaults: s⁺ = 2 and s⁻ = 1/2.
 * - thresholds h⁺, h⁻ from a target in-control ARL: each one-sided chart is
 *   given ARL 2·ARL0 so that the pair has 1/ARL = 1/ARL⁺ + 1/ARL⁻ = 1/ARL0,
 *   with ARLs from the Brook & Evans (1972) Markov chain on the exact χ²_m
 *   distribution of the NIS (see cusum-arl.ts).
 */
import { chiSquareCdf } from '../stats/chi-square';
import { cusumArl, cusumThresholdForArl, combinedArl, DEFAULT_ARL_STATES } from './cusum-arl';
import { CheckpointError, Severity, Verdict, expectInteger, expectKind, expectNumberArray, verdictOf } from './verdict';

/** k = m·s·ln s/(s − 1), the likelihood-ratio reference value for a scale change s of χ²_m. */
export function nisCusumReference(m: number, s: number): number {
  if (!(s > 0) || s === 1 || !Number.isFinite(s)) throw new RangeError(`the designed shift s must be positive and ≠ 1, got ${s}`);
  return (m * s * Math.log(s)) / (s - 1);
}

/** G(y) = P(ε − k ≤ y) for ε ~ χ²_m. */
export function upperIncrementCdf(m: number, k: number): (y: number) => number {
  return (y) => (y + k > 0 ? chiSquareCdf(y + k, m) : 0);
}

/** G(y) = P(k − ε ≤ y) = P(ε ≥ k − y) for ε ~ χ²_m. */
export function lowerIncrementCdf(m: number, k: number): (y: number) => number {
  return (y) => (k - y > 0 ? 1 - chiSquareCdf(k - y, m) : 1);
}

export interface NisCusumDesignInput {
  /** Degrees of freedom of the NIS (measurement dimension). */
  m: number;
  /** Target in-control ARL of the two-sided scheme, in samples. */
  arl0: number;
  /** Designed upward scale change of the NIS (default 2). */
  shiftUp?: number;
  /** Designed downward scale change of the NIS (default 0.5). */
  shiftDown?: number;
  /** Markov-chain states (default 160). */
  states?: number;
}

export interface TwoSidedCusumConfig {
  kUp: number;
  hUp: number;
  kDown: number;
  hDown: number;
  /** Samples after a signal during which the check stays 'inconsistent'. */
  holdSamples: number;
}

export interface NisCusumDesign extends Omit<TwoSidedCusumConfig, 'holdSamples'> {
  m: number;
  arl0: number;
  shiftUp: number;
  shiftDown: number;
  /** Markov-chain in-control ARLs of each chart and of the pair. */
  arlUp: number;
  arlDown: number;
  arlCombined: number;
  method: string;
}

const designCache = new Map<string, NisCusumDesign>();

/** Reference values and thresholds for a target in-control ARL (memoized: ~50 ms the first time). */
export function designNisCusum(input: NisCusumDesignInput): NisCusumDesign {
  const { m, arl0 } = input;
  const shiftUp = input.shiftUp ?? 2;
  const shiftDown = input.shiftDown ?? 0.5;
  const states = input.states ?? DEFAULT_ARL_STATES;
  if (!Number.isInteger(m) || m < 1) throw new RangeError(`m must be a positive integer, got ${m}`);
  if (!(arl0 > 1) || !Number.isFinite(arl0)) throw new RangeError(`arl0 must be finite and > 1, got ${arl0}`);
  if (!(shiftUp > 1)) throw new RangeError(`shiftUp must be > 1, got ${shiftUp}`);
  if (!(shiftDown > 0 && shiftDown < 1)) throw new RangeError(`shiftDown must be in (0, 1), got ${shiftDown}`);
  const key = `${m}|${arl0}|${shiftUp}|${shiftDown}|${states}`;
  const cached = designCache.get(key);
  if (cached) return cached;
  const kUp = nisCusumReference(m, shiftUp);
  const kDown = nisCusumReference(m, shiftDown);
  const scale = Math.sqrt(2 * m); // standard deviation of χ²_m: a sensible first step
  const hUp = cusumThresholdForArl(upperIncrementCdf(m, kUp), 2 * arl0, { states, initialStep: scale });
  const hDown = cusumThresholdForArl(lowerIncrementCdf(m, kDown), 2 * arl0, { states, initialStep: scale });
  const arlUp = cusumArl(upperIncrementCdf(m, kUp), hUp, states);
  const arlDown = cusumArl(lowerIncrementCdf(m, kDown), hDown, states);
  const design: NisCusumDesign = Object.freeze({
    m,
    arl0,
    shiftUp,
    shiftDown,
    kUp,
    hUp,
    kDown,
    hDown,
    arlUp,
    arlDown,
    arlCombined: combinedArl(arlUp, arlDown),
    method: `likelihood-ratio reference values; thresholds from the Brook–Evans Markov chain (${states} states) on χ²_${m}`,
  });
  if (designCache.size > 256) designCache.clear();
  designCache.set(key, design);
  return design;
}

export interface TwoSidedCusumState {
  kind: 'cusum';
  version: 1;
  config: TwoSidedCusumConfig;
  /** [G⁺, G⁻] */
  G: [number, number];
  samples: number;
  signalsUp: number;
  signalsDown: number;
  /** Sample index (1-based count) and sequence number of the last signal, −1 if none. */
  lastSignalSample: number;
  lastSignalSeq: number;
  lastSignalDirection: 'up' | 'down' | 'none';
  /** Estimated onset of the last signalled change: seq of the first sample of the run that signalled. */
  lastSignalOnsetSeq: number;
  /** Seq at which each chart last left zero (start of its current run), −1 if at zero. */
  runStartSeq: [number, number];
}

export interface CusumEvidence {
  verdict: Verdict;
  samples: number;
  /** Current G⁺ and G⁻ with their thresholds and reference values. */
  up: { statistic: number; threshold: number; reference: number; signals: number };
  down: { statistic: number; threshold: number; reference: number; signals: number };
  lastSignal: { direction: 'up' | 'down'; seq: number; onsetSeq: number; samplesAgo: number } | null;
  holdSamples: number;
}

/** Tabular two-sided CUSUM (Page 1954) with restart after a signal. O(1) per sample. */
export class TwoSidedCusum {
  readonly config: Readonly<TwoSidedCusumConfig>;
  private gUp = 0;
  private gDown = 0;
  private samples = 0;
  private signalsUp = 0;
  private signalsDown = 0;
  private lastSignalSample = -1;
  private lastSignalSeq = -1;
  private lastSignalDirection: 'up' | 'down' | 'none' = 'none';
  private lastSignalOnsetSeq = -1;
  private runStartUp = -1;
  private runStartDown = -1;

  constructor(config: TwoSidedCusumConfig) {
    for (const key of ['kUp', 'hUp', 'kDown', 'hDown'] as const) {
      if (!Number.isFinite(config[key])) throw new RangeError(`${key} must be finite, got ${config[key]}`);
    }
    if (!(config.hUp >= 0) || !(config.hDown >= 0)) throw new RangeError('thresholds must be ≥ 0');
    if (!Number.isInteger(config.holdSamples) || config.holdSamples < 0) {
      throw new RangeError(`holdSamples must be an integer ≥ 0, got ${config.holdSamples}`);
    }
    this.config = Object.freeze({ ...config });
  }

  /**
   * Adds one value x (a NIS) with its sequence number; returns +1 on an upward
   * signal, −1 on a downward one, 0 otherwise.
   */
  push(x: number, seq: number): number {
    const c = this.config;
    this.samples++;
    // G⁺_k = max(0, G⁺_{k−1} + x − k⁺)
    let up = this.gUp + x - c.kUp;
    if (up > 0) {
      if (this.gUp === 0) this.runStartUp = seq;
    } else {
      up = 0;
      this.runStartUp = -1;
    }
    // G⁻_k = max(0, G⁻_{k−1} + k⁻ − x)
    let down = this.gDown + c.kDown - x;
    if (down > 0) {
      if (this.gDown === 0) this.runStartDown = seq;
    } else {
      down = 0;
      this.runStartDown = -1;
    }
    let signal = 0;
    if (up > c.hUp) {
      signal = 1;
      this.signalsUp++;
      this.lastSignalDirection = 'up';
      this.lastSignalOnsetSeq = this.runStartUp;
    } else if (down > c.hDown) {
      signal = -1;
      this.signalsDown++;
      this.lastSignalDirection = 'down';
      this.lastSignalOnsetSeq = this.runStartDown;
    }
    if (signal !== 0) {
      this.lastSignalSample = this.samples;
      this.lastSignalSeq = seq;
      up = 0;
      down = 0;
      this.runStartUp = -1;
      this.runStartDown = -1;
    }
    this.gUp = up;
    this.gDown = down;
    return signal;
  }

  /** 2 while a signal is at most holdSamples samples old, else 0. */
  severity(): Severity {
    return this.lastSignalSample >= 0 && this.samples - this.lastSignalSample <= this.config.holdSamples ? 2 : 0;
  }

  verdict(): Verdict {
    return verdictOf(this.severity());
  }

  get statistics(): { up: number; down: number } {
    return { up: this.gUp, down: this.gDown };
  }

  evidence(): CusumEvidence {
    const c = this.config;
    return {
      verdict: this.verdict(),
      samples: this.samples,
      up: { statistic: this.gUp, threshold: c.hUp, reference: c.kUp, signals: this.signalsUp },
      down: { statistic: this.gDown, threshold: c.hDown, reference: c.kDown, signals: this.signalsDown },
      lastSignal:
        this.lastSignalDirection === 'none'
          ? null
          : {
              direction: this.lastSignalDirection,
              seq: this.lastSignalSeq,
              onsetSeq: this.lastSignalOnsetSeq,
              samplesAgo: this.samples - this.lastSignalSample,
            },
      holdSamples: c.holdSamples,
    };
  }

  serialize(): TwoSidedCusumState {
    return {
      kind: 'cusum',
      version: 1,
      config: { ...this.config },
      G: [this.gUp, this.gDown],
      samples: this.samples,
      signalsUp: this.signalsUp,
      signalsDown: this.signalsDown,
      lastSignalSample: this.lastSignalSample,
      lastSignalSeq: this.lastSignalSeq,
      lastSignalDirection: this.lastSignalDirection,
      lastSignalOnsetSeq: this.lastSignalOnsetSeq,
      runStartSeq: [this.runStartUp, this.runStartDown],
    };
  }

  static restore(state: unknown): TwoSidedCusum {
    const s = expectKind(state, 'cusum', 1);
    const config = s['config'] as TwoSidedCusumConfig;
    if (typeof config !== 'object' || config === null) throw new CheckpointError('cusum: missing config');
    const cusum = new TwoSidedCusum(config);
    const G = expectNumberArray(s['G'], 2, 'cusum G');
    if (!(G[0] >= 0 && G[1] >= 0)) throw new CheckpointError('cusum G: statistics must be ≥ 0');
    cusum.gUp = G[0];
    cusum.gDown = G[1];
    const MAX = Number.MAX_SAFE_INTEGER;
    cusum.samples = expectInteger(s['samples'], 0, MAX, 'cusum samples');
    cusum.signalsUp = expectInteger(s['signalsUp'], 0, MAX, 'cusum signalsUp');
    cusum.signalsDown = expectInteger(s['signalsDown'], 0, MAX, 'cusum signalsDown');
    cusum.lastSignalSample = expectInteger(s['lastSignalSample'], -1, MAX, 'cusum lastSignalSample');
    cusum.lastSignalSeq = expectInteger(s['lastSignalSeq'], -1, MAX, 'cusum lastSignalSeq');
    cusum.lastSignalOnsetSeq = expectInteger(s['lastSignalOnsetSeq'], -1, MAX, 'cusum lastSignalOnsetSeq');
    const direction = s['lastSignalDirection'];
    if (direction !== 'up' && direction !== 'down' && direction !== 'none') throw new CheckpointError('cusum lastSignalDirection');
    cusum.lastSignalDirection = direction;
    const runStart = expectNumberArray(s['runStartSeq'], 2, 'cusum runStartSeq');
    cusum.runStartUp = expectInteger(runStart[0], -1, MAX, 'cusum runStartSeq');
    cusum.runStartDown = expectInteger(runStart[1], -1, MAX, 'cusum runStartSeq');
    return cusum;
  }
}
