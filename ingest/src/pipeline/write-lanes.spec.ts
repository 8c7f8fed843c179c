// Which write lane a unit's rows take: always the same one for a unit (so its messages
// commit, and are acknowledged, in the order they came), spread evenly over the lanes.
import { laneOf } from './batch-writer';

describe('laneOf', () => {
  it('gives a unit the same lane every time, within range', () => {
    for (const lanes of [1, 2, 3, 16]) {
      for (const key of ['tractor-01', 'cabinet-12', '', 'x'.repeat(64)]) {
        const lane = laneOf(key, lanes);
        expect(Number.isInteger(lane)).toBe(true);
        expect(lane).toBeGreaterThanOrEqual(0);
        expect(lane).toBeLessThan(lanes);
        expect(laneOf(key, lanes)).toBe(lane);
      }
    }
  });

  it('spreads a fleet of keys evenly over the lanes', () => {
    const keys = Array.from({ length: 10_000 }, (_, i) => `bench-tractor-${String(i).padStart(5, '0')}`);
    for (const lanes of [2, 4]) {
      const counts = new Array<number>(lanes).fill(0);
      for (const k of keys) counts[laneOf(k, lanes)] += 1;
      // Binomial spread: 4 standard deviations around 10,000 / lanes.
      const expected = keys.length / lanes;
      const sd = Math.sqrt(keys.length * (1 / lanes) * (1 - 1 / lanes));
      for (const c of counts) expect(Math.abs(c - expected)).toBeLessThan(4 * sd);
    }
  });
});
