import fc from 'fast-check';
import references from './fixtures/references.json';
import { benjaminiHochberg, fleetDiscoveries } from '../src/fleet/benjamini-hochberg';

describe('Benjamini–Hochberg false discovery rate control', () => {
  it('rejects the first 4 of the 15 p-values of Benjamini & Hochberg (1995) at q = 0.05', () => {
    // The worked example of Benjamini & Hochberg (1995), §4.2: 15 p-values,
    // q = 0.05, four hypotheses rejected (p-values and result from memory;
    // statsmodels' multipletests agrees, see the fixture test below).
    const p = [0.0001, 0.0004, 0.0019, 0.0095, 0.0201, 0.0278, 0.0298, 0.0344, 0.0459, 0.324, 0.4262, 0.5719, 0.6528, 0.759, 1.0];
    const result = benjaminiHochberg(p, 0.05);
    expect(result.rejections).toBe(4);
    expect(result.rejected).toEqual(p.map((_, i) => i < 4));
    // the 4th is the largest with p_(k) ≤ k·q/n: 0.0095 ≤ 4·0.05/15 = 0.0133, while 0.0201 > 5·0.05/15 = 0.0167
    expect(result.threshold).toBeCloseTo((4 * 0.05) / 15, 15);
  });

  it.each(references.benjaminiHochberg.map((c) => [c.name, c] as const))(
    'matches statsmodels multipletests(method="fdr_bh") on %s',
    (_, c) => {
      const result = benjaminiHochberg(c.p, c.q);
      expect(result.rejected).toEqual(c.reject);
      result.adjusted.forEach((a, i) => expect(Math.abs(a - c.adjusted[i])).toBeLessThan(1e-15));
    },
  );

  it('rejects exactly the hypotheses whose adjusted p-value is at most q, whatever the p-values', () => {
    fc.assert(
      fc.property(fc.array(fc.double({ min: 0, max: 1, noNaN: true }), { minLength: 1, maxLength: 60 }), fc.double({ min: 0.001, max: 0.5, noNaN: true }), (p, q) => {
        const result = benjaminiHochberg(p, q);
        result.rejected.forEach((r, i) => expect(r).toBe(result.adjusted[i] <= q));
        // adjusted p-values keep the order of the p-values and are at least the p-value
        const order = p.map((_, i) => i).sort((a, b) => p[a] - p[b]);
        for (let k = 1; k < order.length; k++) expect(result.adjusted[order[k]]).toBeGreaterThanOrEqual(result.adjusted[order[k - 1]]);
        result.adjusted.forEach((a, i) => expect(a).toBeGreaterThanOrEqual(p[i] * (1 - 1e-15))); // n·p/n may round down
      }),
      { numRuns: 500 },
    );
  });

  it('lists the flagged estimators, most significant first', () => {
    const found = fleetDiscoveries(
      [
        { key: 'tractor-07', pValue: 0.2 },
        { key: 'tractor-12', pValue: 0.00001 },
        { key: 'cabinet-03', pValue: 0.0004 },
        { key: 'tractor-31', pValue: 0.9 },
      ],
      0.05,
    );
    expect(found.map((f) => f.key)).toEqual(['tractor-12', 'cabinet-03']);
    expect(found[1].adjusted).toBeCloseTo(0.0008, 15);
  });
});
