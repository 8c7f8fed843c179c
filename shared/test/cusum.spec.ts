import { cusumArl, combinedArl, cusumThresholdForArl, siegmundArl } from '../src/checks/cusum-arl';
import { TwoSidedCusum, designNisCusum, lowerIncrementCdf, nisCusumReference, upperIncrementCdf } from '../src/checks/cusum';
import { chiSquareCdf, normalCdf } from '../src/stats/chi-square';
import { Random } from './support/random';

/** Mean and standard error of successive run lengths of a restarting two-sided CUSUM. */
function monteCarloArl(cusum: TwoSidedCusum, draw: () => number, runs: number): { mean: number; se: number } {
  const lengths: number[] = [];
  let length = 0;
  let seq = 0;
  while (lengths.length < runs) {
    length++;
    if (cusum.push(draw(), seq++) !== 0) {
      lengths.push(length);
      length = 0;
    }
  }
  const mean = lengths.reduce((s, x) => s + x, 0) / runs;
  const variance = lengths.reduce((s, x) => s + (x - mean) ** 2, 0) / (runs - 1);
  return { mean, se: Math.sqrt(variance / runs) };
}

describe('CUSUM average run length (Brook & Evans Markov chain, Siegmund)', () => {
  const normalUp = (k: number) => (y: number) => normalCdf(y + k); // P(x − k ≤ y), x ~ N(0, 1)

  it.each([
    [4, 168], // Montgomery, "Introduction to Statistical Quality Control", ARL table of the tabular CUSUM, k = 1/2, h = 4, no shift: 168 (from memory)
    [5, 465], // same table, h = 5: 465 (from memory)
  ])('gives the published two-sided ARL0 for normal data with k = 0.5, h = %d (%d) within 1 %', (h, published) => {
    // two identical one-sided charts: 1/ARL = 2/ARL⁺
    const arl = combinedArl(cusumArl(normalUp(0.5), h, 200), cusumArl(normalUp(0.5), h, 200));
    expect(Math.abs(arl - published) / published).toBeLessThan(0.01);
  });

  it('agrees with Siegmund’s approximation to within 1 % for the one-sided chart', () => {
    // Montgomery quotes Siegmund's one-sided ARL0 ≈ 336 for k = 0.5, h = 4 (from memory); Siegmund's formula gives 338.1
    expect(siegmundArl(0, 0.5, 4)).toBeCloseTo(338.09, 1);
    for (const h of [3, 4, 5, 6]) {
      const markov = cusumArl(normalUp(0.5), h, 200);
      expect(Math.abs(siegmundArl(0, 0.5, h) - markov) / markov).toBeLessThan(0.01);
    }
  });

  it.each([
    [4, 168, 4000],
    [5, 465, 2000],
  ])('matches, by Monte-Carlo, the published ARL0 for k = 0.5, h = %d (%d) within 4 standard errors', (h, published, runs) => {
    // 4 standard errors of the Monte-Carlo mean: about ±6 % (h = 4) and ±9 % (h = 5)
    const random = new Random(100 + h);
    const cusum = new TwoSidedCusum({ kUp: 0.5, hUp: h, kDown: -0.5, hDown: h, holdSamples: 0 });
    const { mean, se } = monteCarloArl(cusum, () => random.normal(), runs);
    expect(Math.abs(mean - published)).toBeLessThan(4 * se); // published value from memory (Montgomery)
  });

  it('finds the threshold for a target ARL by inverting the Markov-chain ARL', () => {
    const G = normalUp(0.5);
    const h = cusumThresholdForArl(G, 336.4);
    expect(h).toBeCloseTo(4, 2);
    expect(cusumArl(G, h)).toBeCloseTo(336.4, 3);
  });
});

describe('NIS CUSUM designed from a target ARL0', () => {
  it('uses the likelihood-ratio reference value k = m·s·ln s/(s − 1)', () => {
    expect(nisCusumReference(2, 2)).toBeCloseTo(4 * Math.log(2), 14);
    expect(nisCusumReference(1, 0.5)).toBeCloseTo(Math.log(2), 14);
    const design = designNisCusum({ m: 3, arl0: 1000 });
    expect(design.kUp).toBeGreaterThan(3);
    expect(design.kDown).toBeLessThan(3);
    expect(design.arlCombined).toBeCloseTo(1000, 3);
  });

  it.each([
    [1, 400, 2000],
    [2, 400, 2000],
    [6, 300, 2000],
  ])('has in-control run lengths averaging the target, by Monte-Carlo on χ²_m (m = %d, ARL0 = %d)', (m, arl0, runs) => {
    const design = designNisCusum({ m, arl0 });
    const cusum = new TwoSidedCusum({ ...design, holdSamples: 0 });
    const random = new Random(200 + m);
    const { mean, se } = monteCarloArl(cusum, () => random.chiSquare(m), runs);
    // 4 standard errors ≈ ±9 %; the Markov chain's own discretization and the
    // 1/ARL = 1/ARL⁺ + 1/ARL⁻ combination are well inside that
    expect(Math.abs(mean - arl0)).toBeLessThan(4 * se);
  });

  it('raises an alarm within 40 samples (on average) of a doubled NIS level with ARL0 = 10000, m = 2', () => {
    const design = designNisCusum({ m: 2, arl0: 10000 });
    // out-of-control ARL of the upper chart from the Markov chain, NIS ~ 2·χ²₂
    const arl1 = cusumArl((y) => (y + design.kUp > 0 ? chiSquareCdf((y + design.kUp) / 2, 2) : 0), design.hUp);
    const random = new Random(300);
    const cusum = new TwoSidedCusum({ ...design, holdSamples: 0 });
    const { mean, se } = monteCarloArl(cusum, () => 2 * random.chiSquare(2), 2000);
    expect(Math.abs(mean - arl1)).toBeLessThan(4 * se);
    expect(mean).toBeLessThan(40);
  });

  it('signals downward when the NIS halves, and estimates where the change began', () => {
    const design = designNisCusum({ m: 2, arl0: 10000 });
    const cusum = new TwoSidedCusum({ ...design, holdSamples: 50 });
    const random = new Random(301);
    let seq = 0;
    for (; seq < 500; seq++) cusum.push(random.chiSquare(2), seq);
    let signalAt = -1;
    for (; seq < 2000 && signalAt < 0; seq++) if (cusum.push(0.5 * random.chiSquare(2), seq) === -1) signalAt = seq;
    expect(signalAt).toBeGreaterThan(500);
    const evidence = cusum.evidence();
    expect(evidence.verdict).toBe('inconsistent');
    expect(evidence.lastSignal!.direction).toBe('down');
    expect(evidence.lastSignal!.onsetSeq).toBeGreaterThanOrEqual(450);
    expect(evidence.lastSignal!.onsetSeq).toBeLessThanOrEqual(signalAt);
    // the signal holds the verdict for holdSamples samples, then lets go
    for (let k = 0; k < 51; k++) cusum.push(2, seq++);
    expect(cusum.verdict()).toBe('consistent');
  });

  it('restores from a JSON checkpoint and continues identically', () => {
    const design = designNisCusum({ m: 1, arl0: 200 });
    const a = new TwoSidedCusum({ ...design, holdSamples: 10 });
    const random = new Random(7);
    for (let k = 0; k < 500; k++) a.push(random.chiSquare(1), k);
    const b = TwoSidedCusum.restore(JSON.parse(JSON.stringify(a.serialize())));
    for (let k = 500; k < 2000; k++) {
      const x = random.chiSquare(1) * (k > 1000 ? 1.8 : 1);
      expect(b.push(x, k)).toBe(a.push(x, k));
      expect(JSON.stringify(b.evidence())).toBe(JSON.stringify(a.evidence()));
    }
  });

  it('computes the lower chart increments from the χ² CDF', () => {
    const G = lowerIncrementCdf(2, 1.3);
    // P(k − ε ≤ y) = P(ε ≥ k − y) = exp(−(k − y)/2) for χ²₂
    expect(G(0.3)).toBeCloseTo(Math.exp(-0.5), 14);
    expect(G(1.3)).toBe(1);
    expect(upperIncrementCdf(2, 1.3)(-1.3)).toBe(0);
  });
});
