import { SeededRandom, seedOf } from './random';

describe('SeededRandom', () => {
  it('repeats its stream from the same seed and differs from another', () => {
    const a = new SeededRandom(123);
    const b = new SeededRandom(123);
    const c = new SeededRandom(124);
    const xs = Array.from({ length: 100 }, () => a.nextUint32());
    expect(Array.from({ length: 100 }, () => b.nextUint32())).toEqual(xs);
    expect(Array.from({ length: 100 }, () => c.nextUint32())).not.toEqual(xs);
  });

  it('draws uniforms strictly inside (0, 1) with mean 1/2 and variance 1/12', () => {
    const r = new SeededRandom(5);
    const N = 200_000;
    let sum = 0;
    let sumSq = 0;
    let min = 1;
    let max = 0;
    for (let i = 0; i < N; i++) {
      const u = r.uniform();
      sum += u;
      sumSq += u * u;
      min = Math.min(min, u);
      max = Math.max(max, u);
    }
    const mean = sum / N;
    expect(min).toBeGreaterThan(0);
    expect(max).toBeLessThan(1);
    // σ of the mean of N uniforms is √(1/12/N) ≈ 0.00065
    expect(Math.abs(mean - 0.5)).toBeLessThan(0.003);
    expect(Math.abs(sumSq / N - mean * mean - 1 / 12)).toBeLessThan(0.002);
  });

  it('draws standard normals: mean 0, variance 1, and 4.55 % beyond ±2 (normal tables)', () => {
    const r = new SeededRandom(6);
    const N = 200_000;
    let sum = 0;
    let sumSq = 0;
    let beyond2 = 0;
    for (let i = 0; i < N; i++) {
      const g = r.gaussian();
      sum += g;
      sumSq += g * g;
      if (Math.abs(g) > 2) beyond2 += 1;
    }
    expect(Math.abs(sum / N)).toBeLessThan(4 / Math.sqrt(N));
    // the variance of a sample variance of normals is 2/N
    expect(Math.abs(sumSq / N - 1)).toBeLessThan(4 * Math.sqrt(2 / N));
    // P(|Z| > 2) = 0.0455 (standard normal table)
    expect(Math.abs(beyond2 / N - 0.0455)).toBeLessThan(4 * Math.sqrt((0.0455 * 0.9545) / N));
  });

  it('derives distinct, stable seeds from names', () => {
    expect(seedOf(1, 'tractor-07', 'position')).toBe(seedOf(1, 'tractor-07', 'position'));
    expect(seedOf(1, 'tractor-07', 'position')).not.toBe(seedOf(1, 'tractor-70', 'position'));
    expect(seedOf(1, 'ab', 'c')).not.toBe(seedOf(1, 'a', 'bc'));
  });
});
