/**
 * Sequence check: lost samples (gaps), duplicates, late (out-of-order) samples
 * and sequence restarts, by sequence number.
 *
 * Method: the sliding-window replay check of IPsec (RFC 4303, Kent 2005, §3.4.3)
 * in its bitmap form without bit shifting (RFC 6479, Zhang 2012): the last W
 * sequence numbers below the highest one seen are remembered in a circular
 * bitmap indexed by seq mod W, so a sample costs O(1) (amortized over the
 * sequence numbers it advances). A sample with
 * - seq > highest: accepted; highest + 1 < seq opens a gap of seq − highest − 1;
 * - highest − W < seq ≤ highest: a duplicate if its bit is set, otherwise late
 *   (it fills one missing number);
 * - seq ≤ highest − W: too old to tell; two such samples in a row with
 *   consecutive numbers are taken as a restart of the unit's counter, and the
 *   window starts again from there.
 * Late, duplicate and too-old samples are not fed to the statistical checks
 * (they assume time order); the monitor only counts them.
 *
 * Verdict: data loss or disorder says nothing about the filter's statistics, so
 * this check is at most 'marginal': when an event happened within the last
 * `recentSamples` samples.
 */
import { CheckpointError, Severity, Verdict, expectInteger, expectKind, expectNumberArray, verdictOf } from './verdict';

export type SequenceOutcome = 'in_order' | 'gap' | 'late' | 'duplicate' | 'too_old' | 'restart';

/** Outcomes whose samples go on to the statistical checks. */
export function isAccepted(outcome: SequenceOutcome): boolean {
  return outcome === 'in_order' || outcome === 'gap' || outcome === 'restart';
}

export interface SequenceCheckConfig {
  /** W, sequence numbers remembered below the highest (a multiple of 32; default 1024). */
  window: number;
  /** Samples during which an event keeps the check 'marginal'. */
  recentSamples: number;
}

export interface SequenceCheckState {
  kind: 'sequence';
  version: 1;
  config: SequenceCheckConfig;
  highest: number;
  bitmap: number[];
  observed: number;
  counts: { accepted: number; gaps: number; lost: number; late: number; duplicates: number; tooOld: number; restarts: number };
  pendingRestartSeq: number;
  lastEvent: { kind: Exclude<SequenceOutcome, 'in_order'>; seq: number; observed: number } | null;
}

export interface SequenceEvidence {
  verdict: Verdict;
  highestSeq: number | null;
  observed: number;
  accepted: number;
  /** Gap events, and sequence numbers still missing. */
  gaps: number;
  lost: number;
  late: number;
  duplicates: number;
  tooOld: number;
  restarts: number;
  lastEvent: { kind: Exclude<SequenceOutcome, 'in_order'>; seq: number; samplesAgo: number } | null;
}

export class SequenceCheck {
  readonly config: Readonly<SequenceCheckConfig>;
  private readonly bitmap: Uint32Array;
  private highest = -1;
  private observed = 0;
  private accepted = 0;
  private gaps = 0;
  private lost = 0;
  private late = 0;
  private duplicates = 0;
  private tooOld = 0;
  private restarts = 0;
  private pendingRestartSeq = -2;
  private lastEventKind: Exclude<SequenceOutcome, 'in_order'> | null = null;
  private lastEventSeq = -1;
  private lastEventObserved = -1;

  constructor(config: SequenceCheckConfig) {
    if (!Number.isInteger(config.window) || config.window < 32 || config.window % 32 !== 0) {
      throw new RangeError(`window must be a positive multiple of 32, got ${config.window}`);
    }
    if (!Number.isInteger(config.recentSamples) || config.recentSamples < 0) {
      throw new RangeError(`recentSamples must be an integer ≥ 0, got ${config.recentSamples}`);
    }
    this.config = Object.freeze({ window: config.window, recentSamples: config.recentSamples });
    this.bitmap = new Uint32Array(config.window / 32);
  }

  /** Classifies one sequence number and records it. */
  observe(seq: number): SequenceOutcome {
    this.observed++;
    const W = this.config.window;
    if (this.highest < 0) {
      this.highest = seq;
      this.setBit(seq);
      this.accepted++;
      return 'in_order';
    }
    if (seq > this.highest) {
      const skipped = seq - this.highest - 1;
      // clear the bits of the numbers that enter the window (highest+1 … seq)
      if (seq - this.highest >= W) this.bitmap.fill(0);
      else for (let s = this.highest + 1; s <= seq; s++) this.clearBit(s);
      this.highest = seq;
      this.setBit(seq);
      this.accepted++;
      this.pendingRestartSeq = -2;
      if (skipped > 0) {
        this.gaps++;
        this.lost += skipped;
        this.event('gap', seq);
        return 'gap';
      }
      return 'in_order';
    }
    if (seq > this.highest - W) {
      this.pendingRestartSeq = -2;
      if (this.getBit(seq)) {
        this.duplicates++;
        this.event('duplicate', seq);
        return 'duplicate';
      }
      this.setBit(seq);
      this.late++;
      if (this.lost > 0) this.lost--;
      this.event('late', seq);
      return 'late';
    }
    // too old to tell; two consecutive ones mean the unit's counter restarted
    if (seq === this.pendingRestartSeq + 1) {
      this.bitmap.fill(0);
      this.highest = seq;
      this.setBit(seq);
      this.restarts++;
      this.accepted++;
      this.pendingRestartSeq = -2;
      this.event('restart', seq);
      return 'restart';
    }
    this.pendingRestartSeq = seq;
    this.tooOld++;
    this.event('too_old', seq);
    return 'too_old';
  }

  /** The highest sequence number seen (−1 before any). */
  get highestSeq(): number {
    return this.highest;
  }

  /**
   * The unit's counter started again at `seq` (the caller knows it from the sample's
   * time: a number at or below the highest seen, stamped later than anything seen, is a
   * new sample and not a resend). The window starts again from there.
   */
  restart(seq: number): SequenceOutcome {
    this.observed++;
    this.bitmap.fill(0);
    this.highest = seq;
    this.setBit(seq);
    this.restarts++;
    this.accepted++;
    this.pendingRestartSeq = -2;
    this.event('restart', seq);
    return 'restart';
  }

  severity(): Severity {
    return this.lastEventObserved >= 0 && this.observed - this.lastEventObserved < this.config.recentSamples ? 1 : 0;
  }

  verdict(): Verdict {
    return verdictOf(this.severity());
  }

  evidence(): SequenceEvidence {
    return {
      verdict: this.verdict(),
      highestSeq: this.highest >= 0 ? this.highest : null,
      observed: this.observed,
      accepted: this.accepted,
      gaps: this.gaps,
      lost: this.lost,
      late: this.late,
      duplicates: this.duplicates,
      tooOld: this.tooOld,
      restarts: this.restarts,
      lastEvent:
        this.lastEventKind === null
          ? null
          : { kind: this.lastEventKind, seq: this.lastEventSeq, samplesAgo: this.observed - this.lastEventObserved },
    };
  }

  serialize(): SequenceCheckState {
    return {
      kind: 'sequence',
      version: 1,
      config: { ...this.config },
      highest: this.highest,
      bitmap: Array.from(this.bitmap),
      observed: this.observed,
      counts: {
        accepted: this.accepted,
        gaps: this.gaps,
        lost: this.lost,
        late: this.late,
        duplicates: this.duplicates,
        tooOld: this.tooOld,
        restarts: this.restarts,
      },
      pendingRestartSeq: this.pendingRestartSeq,
      lastEvent: this.lastEventKind === null ? null : { kind: this.lastEventKind, seq: this.lastEventSeq, observed: this.lastEventObserved },
    };
  }

  static restore(state: unknown): SequenceCheck {
    const s = expectKind(state, 'sequence', 1);
    const config = s['config'] as SequenceCheckConfig;
    if (typeof config !== 'object' || config === null) throw new CheckpointError('sequence: missing config');
    const check = new SequenceCheck(config);
    const MAX = Number.MAX_SAFE_INTEGER;
    check.highest = expectInteger(s['highest'], -1, MAX, 'sequence highest');
    const bitmap = expectNumberArray(s['bitmap'], check.bitmap.length, 'sequence bitmap');
    for (let i = 0; i < bitmap.length; i++) check.bitmap[i] = expectInteger(bitmap[i], 0, 0xffffffff, 'sequence bitmap word');
    check.observed = expectInteger(s['observed'], 0, MAX, 'sequence observed');
    const counts = s['counts'] as Record<string, unknown> | undefined;
    if (typeof counts !== 'object' || counts === null) throw new CheckpointError('sequence: missing counts');
    check.accepted = expectInteger(counts['accepted'], 0, MAX, 'sequence accepted');
    check.gaps = expectInteger(counts['gaps'], 0, MAX, 'sequence gaps');
    check.lost = expectInteger(counts['lost'], 0, MAX, 'sequence lost');
    check.late = expectInteger(counts['late'], 0, MAX, 'sequence late');
    check.duplicates = expectInteger(counts['duplicates'], 0, MAX, 'sequence duplicates');
    check.tooOld = expectInteger(counts['tooOld'], 0, MAX, 'sequence tooOld');
    check.restarts = expectInteger(counts['restarts'], 0, MAX, 'sequence restarts');
    check.pendingRestartSeq = expectInteger(s['pendingRestartSeq'], -2, MAX, 'sequence pendingRestartSeq');
    const lastEvent = s['lastEvent'] as SequenceCheckState['lastEvent'];
    if (lastEvent !== null) {
      if (typeof lastEvent !== 'object' || !['gap', 'late', 'duplicate', 'too_old', 'restart'].includes(lastEvent.kind)) {
        throw new CheckpointError('sequence lastEvent');
      }
      check.lastEventKind = lastEvent.kind;
      check.lastEventSeq = expectInteger(lastEvent.seq, 0, MAX, 'sequence lastEvent.seq');
      check.lastEventObserved = expectInteger(lastEvent.observed, 0, MAX, 'sequence lastEvent.observed');
    }
    return check;
  }

  private event(kind: Exclude<SequenceOutcome, 'in_order'>, seq: number): void {
    this.lastEventKind = kind;
    this.lastEventSeq = seq;
    this.lastEventObserved = this.observed;
  }

  // Bit for sequence number s at position s mod W. Sequence numbers go up to
  // 2^53, beyond 32-bit integer arithmetic, hence % rather than bit masks.
  private position(s: number): number {
    return s % this.config.window;
  }

  private setBit(s: number): void {
    const p = this.position(s);
    this.bitmap[p >>> 5] |= 1 << (p & 31);
  }

  private clearBit(s: number): void {
    const p = this.position(s);
    this.bitmap[p >>> 5] &= ~(1 << (p & 31));
  }

  private getBit(s: number): boolean {
    const p = this.position(s);
    return (this.bitmap[p >>> 5] & (1 << (p & 31))) !== 0;
  }
}
