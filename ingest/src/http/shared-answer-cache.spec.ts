import { SharedAnswerCache } from './shared-answer-cache';

function manualClock(start = 1_000_000) {
  let now = start;
  return { now: () => now, advance: (ms: number) => (now += ms) };
}

describe('SharedAnswerCache', () => {
  it('computes once for everyone asking while the answer is under way, and reuses it for the time to live', async () => {
    const clock = manualClock();
    const cache = new SharedAnswerCache<number>(2000, clock);
    let computed = 0;
    let release!: () => void;
    const gate = new Promise<void>((r) => (release = r));
    const compute = async () => {
      computed += 1;
      await gate;
      return computed;
    };
    const asks = [cache.get('fleet', compute), cache.get('fleet', compute), cache.get('fleet', compute)];
    release();
    expect(await Promise.all(asks)).toEqual([1, 1, 1]);
    expect(computed).toBe(1);
    clock.advance(1999);
    expect(await cache.get('fleet', compute)).toBe(1);
    clock.advance(1);
    expect(await cache.get('fleet', compute)).toBe(2);
    expect(computed).toBe(2);
  });

  it('keeps different questions apart', async () => {
    const cache = new SharedAnswerCache<string>(2000, manualClock());
    expect(await cache.get('a', async () => 'A')).toBe('A');
    expect(await cache.get('b', async () => 'B')).toBe('B');
    expect(await cache.get('a', async () => 'other')).toBe('A');
  });

  it('does not keep a failure: the next ask computes again', async () => {
    const cache = new SharedAnswerCache<string>(2000, manualClock());
    await expect(cache.get('x', async () => Promise.reject(new Error('database down')))).rejects.toThrow('database down');
    expect(await cache.get('x', async () => 'fine')).toBe('fine');
  });

  it('computes every time when the time to live is 0 (switched off)', async () => {
    const cache = new SharedAnswerCache<number>(0, manualClock());
    let n = 0;
    await cache.get('k', async () => ++n);
    await cache.get('k', async () => ++n);
    expect(n).toBe(2);
    expect(cache.size()).toBe(0);
  });

  it('stays bounded when many distinct questions are asked', async () => {
    const clock = manualClock();
    const cache = new SharedAnswerCache<number>(2000, clock, 10);
    for (let i = 0; i < 50; i++) await cache.get(`q${i}`, async () => i);
    expect(cache.size()).toBeLessThanOrEqual(11);
  });
});
