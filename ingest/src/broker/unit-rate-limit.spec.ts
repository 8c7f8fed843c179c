import { TokenBuckets } from './unit-rate-limit';

describe('TokenBuckets', () => {
  it('lets a new key spend its whole burst at once, then nothing more at the same instant', () => {
    const b = new TokenBuckets({ ratePerSecond: 10, burst: 100 });
    expect(b.take('u', 60, 0)).toBe(true);
    expect(b.take('u', 40, 0)).toBe(true);
    expect(b.take('u', 1, 0)).toBe(false);
    expect(b.available('u', 0)).toBe(0);
  });

  it('refills at the rate, never beyond the burst', () => {
    const b = new TokenBuckets({ ratePerSecond: 10, burst: 100 });
    b.take('u', 100, 1000);
    expect(b.available('u', 1500)).toBeCloseTo(5, 10);
    expect(b.take('u', 5, 1500)).toBe(true);
    expect(b.take('u', 1, 1500)).toBe(false);
    expect(b.available('u', 1_000_000)).toBe(100);
  });

  it('takes all or nothing: a refused request costs no tokens', () => {
    const b = new TokenBuckets({ ratePerSecond: 1, burst: 10 });
    expect(b.take('u', 8, 0)).toBe(true);
    expect(b.take('u', 5, 0)).toBe(false);
    expect(b.available('u', 0)).toBe(2);
    expect(b.take('u', 2, 0)).toBe(true);
  });

  it('holds a flood to the sustained rate plus the burst', () => {
    const b = new TokenBuckets({ ratePerSecond: 100, burst: 500 });
    let taken = 0;
    // 10 s of one-sample messages every 0.1 ms (10,000 per second)
    for (let t = 0; t <= 10_000; t += 0.1) if (b.take('flood', 1, t)) taken += 1;
    expect(taken).toBeGreaterThanOrEqual(500 + 100 * 10 - 1);
    expect(taken).toBeLessThanOrEqual(500 + 100 * 10 + 1);
  });

  it('keeps keys apart: one key flooding does not touch another', () => {
    const b = new TokenBuckets({ ratePerSecond: 1, burst: 5 });
    for (let i = 0; i < 100; i++) b.take('loud', 1, 0);
    expect(b.take('quiet', 5, 0)).toBe(true);
  });

  it('adds nothing when the clock steps back', () => {
    const b = new TokenBuckets({ ratePerSecond: 1000, burst: 10 });
    b.take('u', 10, 5000);
    expect(b.available('u', 1000)).toBe(0);
    expect(b.take('u', 1, 4000)).toBe(false);
    expect(b.available('u', 5001)).toBeCloseTo(1, 10);
  });

  it('stays bounded when every request brings a new key, forgetting full buckets first', () => {
    const b = new TokenBuckets({ ratePerSecond: 1, burst: 3, maxKeys: 100 });
    for (let i = 0; i < 10_000; i++) b.take(`id-${i}`, 1, i);
    expect(b.size()).toBeLessThanOrEqual(100);
    // a key still short of tokens at the end is remembered
    expect(b.available('id-9999', 9999)).toBe(2);
  });

  it('refuses settings that make no sense', () => {
    expect(() => new TokenBuckets({ ratePerSecond: 0, burst: 1 })).toThrow(/ratePerSecond/);
    expect(() => new TokenBuckets({ ratePerSecond: 1, burst: 0.5 })).toThrow(/burst/);
    expect(() => new TokenBuckets({ ratePerSecond: Number.NaN, burst: 1 })).toThrow(/ratePerSecond/);
    expect(() => new TokenBuckets({ ratePerSecond: 1, burst: 1, maxKeys: 0 })).toThrow(/maxKeys/);
  });
});
