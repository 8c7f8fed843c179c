import { PageHinkleyTest, designPageHinkley } from '../src/checks/page-hinkley';
import { Random } from './support/random';

describe('Page–Hinkley drift check on the NIS', () => {
  it('has in-control first-passage times averaging the target ARL0, by Monte-Carlo on χ²₂', () => {
    const design = designPageHinkley({ m: 2, arl0: 300 });
    expect(design.mu0).toBe(2);
    expect(design.deltaUp).toBe(2);
    expect(design.deltaDown).toBe(1);
    expect(design.arlCombined).toBeCloseTo(300, 3);
    const random = new Random(41);
    const lengths: number[] = [];
    for (let run = 0; run < 1500; run++) {
      const test = new PageHinkleyTest(design);
      let k = 0;
      while (test.severity() === 0) test.push(random.chiSquare(2), k++);
      lengths.push(k);
    }
    const mean = lengths.reduce((s, x) => s + x, 0) / lengths.length;
    const se = Math.sqrt(lengths.reduce((s, x) => s + (x - mean) ** 2, 0) / (lengths.length - 1) / lengths.length);
    expect(Math.abs(mean - 300)).toBeLessThan(4 * se); // 4 standard errors ≈ ±10 %
  });

  it('detects a doubled mean NIS, estimates the onset, stays signalled while it lasts and clears after', () => {
    const design = designPageHinkley({ m: 2, arl0: 10000 });
    const test = new PageHinkleyTest(design);
    const random = new Random(42);
    let seq = 0;
    for (; seq < 1000; seq++) test.push(random.chiSquare(2), seq);
    const onset = seq;
    let detectedAt = -1;
    for (; seq < 1400; seq++) {
      test.push(2 * random.chiSquare(2), seq);
      if (detectedAt < 0 && test.verdict() === 'inconsistent') detectedAt = seq;
    }
    expect(detectedAt).toBeGreaterThan(onset);
    expect(detectedAt - onset).toBeLessThan(60);
    const evidence = test.evidence();
    expect(evidence.verdict).toBe('inconsistent');
    expect(evidence.up.signals).toBe(1); // one signal for one change: no restart
    expect(evidence.up.onsetSeq!).toBeGreaterThanOrEqual(onset - 30);
    expect(evidence.up.onsetSeq!).toBeLessThanOrEqual(onset + 30);
    for (; seq < 4000 && test.verdict() === 'inconsistent'; seq++) test.push(random.chiSquare(2), seq);
    expect(test.verdict()).toBe('consistent');
  });

  it('detects a halved mean NIS on the lower side', () => {
    const test = new PageHinkleyTest(designPageHinkley({ m: 1, arl0: 5000 }));
    const random = new Random(43);
    let seq = 0;
    for (; seq < 500; seq++) test.push(random.chiSquare(1), seq);
    for (; seq < 1500 && test.verdict() === 'consistent'; seq++) test.push(0.5 * random.chiSquare(1), seq);
    expect(test.verdict()).toBe('inconsistent');
    const { up, down } = test.evidence();
    expect(down.signals).toBe(1);
    expect(down.statistic).toBeGreaterThan(down.threshold);
    expect(up.statistic).toBeLessThanOrEqual(up.threshold);
    expect(down.onsetSeq!).toBeGreaterThan(400);
  });

  it('restores from a JSON checkpoint and continues identically', () => {
    const a = new PageHinkleyTest(designPageHinkley({ m: 2, arl0: 1000 }));
    const random = new Random(44);
    for (let k = 0; k < 300; k++) a.push(random.chiSquare(2), k);
    const b = PageHinkleyTest.restore(JSON.parse(JSON.stringify(a.serialize())));
    for (let k = 300; k < 1000; k++) {
      const x = random.chiSquare(2) * (k > 600 ? 2 : 1);
      a.push(x, k);
      b.push(x, k);
      expect(JSON.stringify(b.evidence())).toBe(JSON.stringify(a.evidence()));
    }
  });
});
