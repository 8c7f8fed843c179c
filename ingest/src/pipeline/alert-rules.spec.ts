import { AlertRuleState, type Condition } from './alert-rules';

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
