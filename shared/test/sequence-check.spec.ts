import { SequenceCheck, isAccepted } from '../src/checks/sequence-check';

describe('sequence check', () => {
  const make = () => new SequenceCheck({ window: 64, recentSamples: 10 });

  it('accepts consecutive numbers and says consistent', () => {
    const check = make();
    for (let s = 100; s < 200; s++) expect(check.observe(s)).toBe('in_order');
    expect(check.verdict()).toBe('consistent');
    expect(check.evidence()).toMatchObject({ accepted: 100, gaps: 0, lost: 0, highestSeq: 199 });
  });

  it('counts a gap and the lost samples, and is marginal while the event is recent', () => {
    const check = make();
    for (let s = 0; s < 20; s++) check.observe(s);
    expect(check.observe(25)).toBe('gap');
    expect(check.evidence()).toMatchObject({ gaps: 1, lost: 5 });
    expect(check.verdict()).toBe('marginal');
    for (let s = 26; s < 36; s++) check.observe(s);
    expect(check.verdict()).toBe('consistent');
  });

  it('tells a duplicate from a late sample, and a late sample fills the gap', () => {
    const check = make();
    for (let s = 0; s < 10; s++) check.observe(s);
    check.observe(12);
    expect(check.observe(5)).toBe('duplicate');
    expect(check.observe(10)).toBe('late');
    expect(check.observe(10)).toBe('duplicate');
    expect(check.observe(12)).toBe('duplicate');
    expect(check.evidence()).toMatchObject({ lost: 1, late: 1, duplicates: 3 });
    expect(isAccepted('late')).toBe(false);
    expect(isAccepted('duplicate')).toBe(false);
  });

  it('handles gaps longer than the window and sequence numbers near 2^53', () => {
    const check = make();
    const big = Number.MAX_SAFE_INTEGER - 1000;
    check.observe(big);
    expect(check.observe(big + 500)).toBe('gap');
    expect(check.observe(big + 499)).toBe('late');
    expect(check.observe(big + 500)).toBe('duplicate');
    expect(check.observe(big + 100)).toBe('too_old');
    expect(check.evidence().lost).toBe(498);
  });

  it('takes two consecutive too-old numbers as a restart of the unit’s counter', () => {
    const check = make();
    for (let s = 5000; s < 5100; s++) check.observe(s);
    expect(check.observe(0)).toBe('too_old');
    expect(check.observe(1)).toBe('restart');
    expect(check.observe(2)).toBe('in_order');
    expect(check.evidence()).toMatchObject({ restarts: 1, highestSeq: 2 });
    // a single stray old number is not a restart
    expect(check.observe(3)).toBe('in_order');
    for (let s = 4; s < 200; s++) check.observe(s);
    expect(check.observe(50)).toBe('too_old');
    expect(check.observe(200)).toBe('in_order');
  });

  it('restores from a JSON checkpoint and classifies identically', () => {
    const a = make();
    for (let s = 0; s < 300; s += s % 7 === 0 ? 2 : 1) a.observe(s);
    const b = SequenceCheck.restore(JSON.parse(JSON.stringify(a.serialize())));
    const next = [300, 299, 250, 298, 301, 301, 400, 350, 10, 11, 12];
    for (const s of next) {
      expect(b.observe(s)).toBe(a.observe(s));
      expect(b.evidence()).toEqual(a.evidence());
    }
  });
});

describe('EstimatorMonitor and a unit whose counter starts again', () => {
  it('takes samples with numbers it has seen but later times as a restart, and a resend (same time) as a duplicate', () => {
    // Imported here to keep this file's own tests on SequenceCheck alone above.
    // eslint-disable-next-line @typescript-eslint/no-require-imports
    const { EstimatorMonitor } = require('../src/monitor/estimator-monitor') as typeof import('../src/monitor/estimator-monitor');
    const monitor = new EstimatorMonitor({ m: 1 });
    const sample = (seq: number, t: number) => ({ seq, t, nu: [0.1], S: [[1]] });
    for (let seq = 1; seq <= 300; seq++) expect(monitor.ingest(sample(seq, seq * 1000))).not.toBe('duplicate');
    expect(monitor.ingest(sample(300, 300_000))).toBe('duplicate'); // a resend
    expect(monitor.ingest(sample(1, 400_000))).toBe('restart'); // the unit restarted
    expect(monitor.ingest(sample(2, 401_000))).toBe('in_order');
    expect(monitor.ingest(sample(2, 401_000))).toBe('duplicate');
    expect(monitor.report().checks?.sequence.restarts).toBe(1);
  });
});
