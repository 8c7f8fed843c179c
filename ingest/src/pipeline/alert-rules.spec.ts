import { EstimatorMonitor } from '../../../shared/src/index';
import { AlertRuleState, conditionsFromReport, lostSamplesCondition, type Condition } from './alert-rules';

const nis: Condition = { rule: 'nis-window', severity: 'critical', summary: 'NIS window out of bounds', evidence: { statistic: 300 } };
const evaluated = new Set(['nis-window', 'bias'] as const);

describe('AlertRuleState', () => {
  it('opens one alert per rule, then only refreshes its evidence while the condition holds', () => {
    const s = new AlertRuleState({ estimatorId: 7, unitId: 3 }, 60_000);
    const first = s.evaluate([nis], evaluated, 1000);
    expect(first).toEqual([expect.objectContaining({ kind: 'open', rule: 'nis-window', estimatorId: 7, unitId: 3, severity: 'critical' })]);
    const again = s.evaluate([nis], evaluated, 2000);
    expect(again).toEqual([expect.objectContaining({ kind: 'evidence', rule: 'nis-window' })]);
    expect(s.liveRules()).toEqual(['nis-window']);
  });

  it('clears only after the condition has stayed gone for the hold time', () => {
    const s = new AlertRuleState({ estimatorId: 7, unitId: 3 }, 60_000);
    s.evaluate([nis], evaluated, 0);
    expect(s.evaluate([], evaluated, 10_000)).toEqual([]); // gone, hold starts
    expect(s.evaluate([], evaluated, 69_999)).toEqual([]); // not yet
    const cleared = s.evaluate([], evaluated, 70_000);
    expect(cleared).toEqual([expect.objectContaining({ kind: 'clear', rule: 'nis-window' })]);
    expect(s.liveRules()).toEqual([]);
  });

  it('restarts the hold when the condition comes back before it ends (hysteresis)', () => {
    const s = new AlertRuleState({ estimatorId: 1, unitId: 1 }, 60_000);
    s.evaluate([nis], evaluated, 0);
    s.evaluate([], evaluated, 10_000);
    s.evaluate([nis], evaluated, 50_000); // back: no new alert
    expect(s.evaluate([], evaluated, 100_000)).toEqual([]); // hold restarted at 100 s
    expect(s.evaluate([], evaluated, 160_000)).toEqual([expect.objectContaining({ kind: 'clear' })]);
  });

  it('leaves alone the rules an evaluation does not speak for', () => {
    const s = new AlertRuleState({ estimatorId: 1, unitId: 1 }, 0);
    s.evaluate([{ ...nis, rule: 'silence' }], new Set(['silence']), 0);
    expect(s.evaluate([], evaluated, 1_000_000)).toEqual([]);
    expect(s.liveRules()).toEqual(['silence']);
  });

  it('adopts an alert found live in the database so that it can clear', () => {
    const s = new AlertRuleState({ estimatorId: 1, unitId: 1 }, 1000);
    s.adopt('bias', 0);
    s.evaluate([], evaluated, 5000);
    expect(s.evaluate([], evaluated, 6000)).toEqual([expect.objectContaining({ kind: 'clear', rule: 'bias' })]);
  });
});

describe('conditionsFromReport', () => {
  // A seeded scalar stream: innovations drawn with standard deviation `scale`, while the
  // filter claims S = 1; the reference error e ~ N(0, scale²) against P = 1.
  function report(scale: number, neesInVerdict = false) {
    const monitor = new EstimatorMonitor({ m: 1, arl0: 1e7, neesInVerdict });
    let state = 12345;
    const uniform = () => {
      state = (Math.imul(state, 1103515245) + 12345) >>> 0;
      return (state + 0.5) / 2 ** 32;
    };
    const gauss = () => Math.sqrt(-2 * Math.log(uniform())) * Math.cos(2 * Math.PI * uniform());
    for (let seq = 1; seq <= 300; seq++) {
      monitor.ingest({ seq, t: seq * 1000, nu: [scale * gauss()], S: [[1]], e: [scale * gauss()], P: [[1]] });
    }
    return monitor.report();
  }

  it('finds nothing to page about on a consistent stream', () => {
    expect(conditionsFromReport(report(1))).toEqual([]);
  });

  it('pages on the NIS window, naming the bounds, when the innovations are three times larger than the filter believes', () => {
    const rules = conditionsFromReport(report(3));
    const nis = rules.find((c) => c.rule === 'nis-window');
    expect(nis?.severity).toBe('critical');
    expect(nis?.summary).toMatch(/above its 99\.9 % chi-square bounds/);
    expect(rules.map((c) => c.rule)).toContain('cusum-drift');
  });

  it('leaves NEES out of the pages unless the checks count it in the verdict', () => {
    expect(conditionsFromReport(report(3)).some((c) => c.rule === 'nees-window')).toBe(false);
    const withNees = conditionsFromReport(report(3, true), { alertPValue: 1e-6, neesAlerts: true });
    expect(withNees.some((c) => c.rule === 'nees-window')).toBe(true);
  });
});

describe('lostSamplesCondition', () => {
  it('needs at least 3 lost samples and more than 1 % of the recent ones', () => {
    expect(lostSamplesCondition(2, 10)).toBeNull();
    expect(lostSamplesCondition(3, 1000)).toBeNull();
    expect(lostSamplesCondition(10, 190)?.summary).toMatch(/10 of the last 200 samples were lost/);
  });
});
