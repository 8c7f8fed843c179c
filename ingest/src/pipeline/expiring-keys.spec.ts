import { ExpiringKeys } from './expiring-keys';

describe('ExpiringKeys', () => {
  it('remembers a key for its lifetime and forgets it after', () => {
    const keys = new ExpiringKeys(30_000, 100);
    keys.add('tractor-1/position', 1_000);
    expect(keys.has('tractor-1/position', 30_999)).toBe(true);
    expect(keys.has('tractor-1/position', 31_000)).toBe(false);
    expect(keys.has('tractor-2/position', 1_000)).toBe(false);
  });

  it('drops expired keys as new ones come, so invented keys do not pile up', () => {
    const keys = new ExpiringKeys(1_000, 1_000_000);
    // A key a millisecond for 100 s: at most about one lifetime's worth is kept.
    for (let t = 0; t < 100_000; t++) keys.add(`unit/invented-${t}`, t);
    expect(keys.size).toBeLessThanOrEqual(1_001);
    expect(keys.has('unit/invented-99999', 99_999)).toBe(true);
    expect(keys.has('unit/invented-0', 99_999)).toBe(false);
  });

  it('keeps at most max keys, dropping the oldest', () => {
    const keys = new ExpiringKeys(60_000, 3);
    for (const k of ['a', 'b', 'c', 'd']) keys.add(k, 0);
    expect(keys.size).toBe(3);
    expect(keys.has('a', 0)).toBe(false);
    expect(['b', 'c', 'd'].every((k) => keys.has(k, 0))).toBe(true);
  });

  it('moves a key added again to the end, with a new lifetime', () => {
    const keys = new ExpiringKeys(10, 2);
    keys.add('a', 0);
    keys.add('b', 1);
    keys.add('a', 5); // a expires at 15 now, after b
    keys.add('c', 6); // over the bound: the oldest, b, goes
    expect(keys.has('b', 6)).toBe(false);
    expect(keys.has('a', 14)).toBe(true);
    expect(keys.has('c', 6)).toBe(true);
  });

  it('forgets a deleted key', () => {
    const keys = new ExpiringKeys(10, 2);
    keys.add('a', 0);
    keys.delete('a');
    expect(keys.has('a', 1)).toBe(false);
    expect(keys.size).toBe(0);
  });
});
