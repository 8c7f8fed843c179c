// Alert rules over the checks. A rule's condition comes from an estimator's report
// (or from time, for silence); the rule state adds what makes alerts bearable:
// one live alert per estimator and rule, evidence refreshed while it lasts, and a
// hold time (hysteresis) before an alert clears by itself once its condition is gone.
import type { BiasEvidence, EstimatorReport, WhitenessEvidence } from '../../../shared/src/index';
import type { AlertOp } from './batch-writer';

export type RuleName =
  | 'nis-window'
  | 'nees-window'
  | 'cusum-drift'
  | 'whiteness'
  | 'bias'
  | 'lost-samples'
  | 'silence'
  | 'quarantine-rate';

export type Severity = 'info' | 'warning' | 'critical';

export interface Condition {
  rule: RuleName;
  severity: Severity;
  summary: string;
  evidence: unknown;
}

export const RULE_SEVERITY: Record<RuleName, Severity> = {
  'nis-window': 'critical',
  'nees-window': 'warning',
  'cusum-drift': 'warning',
  whiteness: 'warning',
  bias: 'warning',
  'lost-samples': 'warning',
  silence: 'critical',
  'quarantine-rate': 'warning',
};

/** Lost samples: at least `minLost`, and more than `fraction` of the samples since the last look. */
export function lostSamplesCondition(lostDelta: number, acceptedDelta: number, minLost = 3, fraction = 0.01): Condition | null {
  const total = lostDelta + acceptedDelta;
  if (lostDelta < minLost || lostDelta <= fraction * total) return null;
  return {
    rule: 'lost-samples',
    severity: RULE_SEVERITY['lost-samples'],
    summary: `about ${lostDelta} of the last ${total} samples were lost (sequence gaps)`,
    evidence: { check: 'sequence', lost: lostDelta, expected: total, fraction: lostDelta / total, threshold: fraction },
  };
}

const fmt = (x: number, digits = 3): string => (Number.isFinite(x) ? Number(x.toPrecision(digits)).toString() : String(x));

/**
 * Pages must be sure where verdicts are sensitive: a window test shows 'inconsistent'
 * on the dashboard at its significance (0.001 by default) and sliding windows cross
 * that by chance now and then; an alert needs its p-value below `alertPValue`
 * (default 1e-6). A real fault drives the p-value far below that within a window.
 */
export interface RuleSettings {
  alertPValue: number;
  /**
   * The NEES window test assumes independent NEES values; from one running filter they
   * are strongly correlated in time, so its bounds only hold across independent runs
   * (test rigs). It pages only when the checks count it in the verdict (`neesInVerdict`).
   */
  neesAlerts: boolean;
}

export const DEFAULT_RULE_SETTINGS: RuleSettings = { alertPValue: 1e-6, neesAlerts: false };

/** The rules whose conditions hold in this report, each with its evidence in words and numbers. */
export function conditionsFromReport(report: EstimatorReport, settings: RuleSettings = DEFAULT_RULE_SETTINGS): Condition[] {
  const out: Condition[] = [];
  const c = report.checks;
  if (!c) return out;
  const sure = (ready: boolean, pValue: number) => ready && pValue < settings.alertPValue;
  if (sure(c.nis.ready, c.nis.pValue)) {
    const side = c.nis.statistic > c.nis.bounds.upper ? 'above' : 'below';
    out.push({
      rule: 'nis-window',
      severity: RULE_SEVERITY['nis-window'],
      summary:
        `NIS window sum ${fmt(c.nis.statistic, 4)} is ${side} its ${fmt((1 - c.nis.alpha) * 100)} % chi-square bounds ` +
        `[${fmt(c.nis.bounds.lower, 4)}, ${fmt(c.nis.bounds.upper, 4)}] (${c.nis.samples} samples, ${c.nis.dof} dof, p = ${fmt(c.nis.pValue, 2)}); ` +
        (side === 'above' ? 'the innovations are larger than the filter believes' : 'the innovations are smaller than the filter believes'),
      evidence: { check: 'nis', ...c.nis },
    });
  }
  if (settings.neesAlerts && c.nees && sure(c.nees.ready, c.nees.pValue)) {
    out.push({
      rule: 'nees-window',
      severity: RULE_SEVERITY['nees-window'],
      summary: `NEES window sum ${fmt(c.nees.statistic, 4)} outside [${fmt(c.nees.bounds.lower, 4)}, ${fmt(c.nees.bounds.upper, 4)}] (p = ${fmt(c.nees.pValue, 2)})`,
      evidence: { check: 'nees', ...c.nees },
    });
  }
  if (c.cusum && c.cusum.lastSignal && c.cusum.lastSignal.samplesAgo <= c.cusum.holdSamples) {
    const up = c.cusum.lastSignal.direction === 'up';
    const side = up ? c.cusum.up : c.cusum.down;
    out.push({
      rule: 'cusum-drift',
      severity: RULE_SEVERITY['cusum-drift'],
      summary:
        `CUSUM on NIS crossed its threshold ${fmt(side.threshold)} ${up ? 'upward: noise is larger' : 'downward: noise is smaller'} than the filter believes ` +
        `(onset near sample ${c.cusum.lastSignal.onsetSeq}, signalled at ${c.cusum.lastSignal.seq})`,
      evidence: { check: 'cusum', ...c.cusum },
    });
  }
  if (sure(c.whiteness.ready, c.whiteness.pValue)) {
    out.push({
      rule: 'whiteness',
      severity: RULE_SEVERITY.whiteness,
      summary: `innovations are not white: ${describeWhiteness(c.whiteness)}`,
      evidence: { check: 'whiteness', ...c.whiteness },
    });
  }
  if (sure(c.bias.ready, c.bias.pValue)) {
    out.push({
      rule: 'bias',
      severity: RULE_SEVERITY.bias,
      summary: `innovations are biased: ${describeBias(c.bias)}`,
      evidence: { check: 'bias', ...c.bias },
    });
  }
  return out;
}

function describeWhiteness(w: WhitenessEvidence): string {
  return (
    `Ljung–Box Q = ${fmt(w.statistic)} over ${w.lags} lags (${w.dof} dof, p = ${fmt(w.pValue, 2)}); ` +
    `${w.outsideBound} autocorrelations outside ±${fmt(w.autocorrelationBound)} where ${fmt(w.expectedOutside, 2)} are expected by chance`
  );
}

function describeBias(b: BiasEvidence): string {
  const bad = b.components.map((c, i) => ({ i, ...c })).filter((c) => c.verdict === 'inconsistent');
  if (bad.length === 0) return `window mean outside its bounds (p = ${fmt(b.pValue, 2)})`;
  return bad
    .map((c) => `component ${c.i + 1} whitened mean ${fmt(c.mean)} beyond ±${fmt(c.bound)} (z = ${fmt(c.z)})`)
    .join('; ');
}

interface RuleMemory {
  /** Time the alert opened. */
  since: number;
  /** When the condition was last seen gone (null while it holds). */
  clearSince: number | null;
}

/**
 * The alert state of one subject (an estimator, or a unit for unit-level rules).
 * `evaluate` takes the conditions that hold now and returns the operations to store.
 */
export class AlertRuleState {
  private readonly live = new Map<RuleName, RuleMemory>();

  constructor(
    private readonly subject: { estimatorId: number | null; unitId: number | null },
    private readonly holdMs: number,
  ) {}

  /** Rules for which this subject has a live alert. */
  liveRules(): RuleName[] {
    return [...this.live.keys()];
  }

  /**
   * @param conditions the rules whose conditions hold now
   * @param evaluated the rules these conditions speak for (others are left alone)
   */
  evaluate(conditions: Condition[], evaluated: ReadonlySet<RuleName>, nowMs: number): AlertOp[] {
    const ops: AlertOp[] = [];
    const { estimatorId, unitId } = this.subject;
    const holding = new Map(conditions.map((c) => [c.rule, c]));
    for (const c of conditions) {
      const mem = this.live.get(c.rule);
      if (!mem) {
        this.live.set(c.rule, { since: nowMs, clearSince: null });
        ops.push({ kind: 'open', estimatorId, unitId, rule: c.rule, severity: c.severity, summary: c.summary, evidence: c.evidence, atMs: nowMs });
      } else {
        mem.clearSince = null;
        ops.push({ kind: 'evidence', estimatorId, unitId, rule: c.rule, evidence: c.evidence, atMs: nowMs });
      }
    }
    for (const [rule, mem] of this.live) {
      if (holding.has(rule) || !evaluated.has(rule)) continue;
      if (mem.clearSince === null) mem.clearSince = nowMs;
      if (nowMs - mem.clearSince >= this.holdMs) {
        this.live.delete(rule);
        ops.push({ kind: 'clear', estimatorId, unitId, rule, evidence: { clearedForMs: nowMs - mem.clearSince }, atMs: nowMs });
      }
    }
    return ops;
  }

  /** Restores a live alert found in the database at start. */
  adopt(rule: RuleName, openedAtMs: number): void {
    if (!this.live.has(rule)) this.live.set(rule, { since: openedAtMs, clearSince: null });
  }
}

export const ESTIMATOR_RULES: ReadonlySet<RuleName> = new Set([
  'nis-window',
  'nees-window',
  'cusum-drift',
  'whiteness',
  'bias',
  'lost-samples',
]);
