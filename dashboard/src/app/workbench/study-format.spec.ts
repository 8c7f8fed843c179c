import {
  diagonalRatioWords,
  diskVariations,
  floorWords,
  formatComplex,
  formatEntry,
  formatInterval,
  formatMultiple,
  identifiabilityWords,
  marginFloors,
  marginStanding,
  marginWords,
  matrixCells,
  matrixShape,
  nisWords,
  poleRows,
  spectralRadius,
} from './study-format';

describe('matrix formatting', () => {
  it('writes entries with four significant figures, a true minus sign, and exponents when tiny or huge', () => {
    expect(formatEntry(0)).toBe('0');
    expect(formatEntry(0.012345)).toBe('0.01235');
    expect(formatEntry(-2.5)).toBe('−2.5');
    expect(formatEntry(12345.678)).toBe('12350');
    expect(formatEntry(0.0005)).toBe('5.00e−4');
    expect(formatEntry(-3.2e-9)).toBe('−3.20e−9');
    expect(formatEntry(4.5e7)).toBe('4.50e7');
    expect(formatEntry(Infinity)).toBe('∞');
    expect(formatEntry(null)).toBe('—');
    expect(formatEntry(NaN)).toBe('—');
  });

  it('lays a matrix out as rows of cells with each entry’s interval and whether it spans zero', () => {
    const cells = matrixCells(
      [
        [0.05, -0.001],
        [-0.001, 0.04],
      ],
      [
        [[0.04, 0.06], [-0.003, 0.002]],
        [[-0.003, 0.002], [0.035, 0.047]],
      ],
    );
    expect(cells[0][0]).toEqual({ text: '0.05', interval: '0.04 to 0.06', spansZero: false });
    expect(cells[0][1]).toEqual({ text: '−0.001', interval: '−0.003 to 0.002', spansZero: true });
    // A diagonal estimate's off-diagonal entries are held at 0: no interval to show.
    expect(matrixCells([[0.05, 0]], [[[0.04, 0.06], [0, 0]]])[0][1]).toEqual({ text: '0', interval: null, spansZero: false });
    expect(matrixCells([[1, 2]])).toEqual([[{ text: '1', interval: null, spansZero: false }, { text: '2', interval: null, spansZero: false }]]);
    expect(matrixShape([[1, 2, 3], [4, 5, 6]])).toBe('2 × 3');
  });
});

describe('interval formatting', () => {
  it('writes an interval low to high, whichever order it came in', () => {
    expect(formatInterval([0.1, 0.3])).toBe('0.1 to 0.3');
    expect(formatInterval([0.3, 0.1])).toBe('0.1 to 0.3');
    expect(formatInterval([-1.5e-4, 2e-4])).toBe('−1.50e−4 to 2.00e−4');
  });

  it('shows a dash for a missing or unbounded interval', () => {
    expect(formatInterval(null)).toBe('—');
    expect(formatInterval(undefined)).toBe('—');
    expect(formatInterval([0, Infinity])).toBe('—');
  });
});

describe('study words', () => {
  it('says plainly when the data do not determine Q, with the service’s reason', () => {
    expect(identifiabilityWords('Q', true, '')).toBe('The data determine Q.');
    const words = identifiabilityWords('Q', false, 'the lags see only the sum G Q Gᵀ + L R Lᵀ.');
    expect(words).toMatch(/^The data do not determine Q: the lags see only the sum G Q Gᵀ \+ L R Lᵀ\. /);
    expect(words).toContain('do not base a gain on it alone');
  });

  it('writes NIS means as multiples of their expected value', () => {
    expect(formatMultiple(1)).toBe('1.00×');
    expect(formatMultiple(23.44)).toBe('23.4×');
    expect(formatMultiple(1234.5)).toBe('1,235×');
    expect(nisWords(23.4, 2)).toBe('23.4× expected (mean NIS 46.8 against m = 2)');
    expect(nisWords(NaN, 2)).toBe('not available');
  });

  it('compares the estimated diagonal with the assumed one, skipping entries assumed zero', () => {
    expect(diagonalRatioWords([[0.0005, 0], [0, 0.0005]], [[0.05, 0], [0, 0.0251]])).toBe('Diagonal 50.2× to 100× the assumed.');
    expect(diagonalRatioWords([[2]], [[2]])).toBe('Diagonal 1.00× the assumed.');
    expect(diagonalRatioWords([[0]], [[1]])).toBeNull();
  });

  it('writes poles as complex numbers with their distance from the origin', () => {
    expect(formatComplex({ re: 0.9, im: -0.1 })).toBe('0.9 − 0.1j');
    expect(formatComplex({ re: 0.5, im: 1e-15 })).toBe('0.5');
    expect(poleRows([{ re: 0.6, im: 0.8 }, { re: 0.3, im: 0.4 }])).toEqual([
      { text: '0.6 + 0.8j', modulus: '1', stable: false },
      { text: '0.3 + 0.4j', modulus: '0.5', stable: true },
    ]);
    expect(spectralRadius([{ re: -0.7, im: 0 }, { re: 0.3, im: 0.4 }])).toBeCloseTo(0.7, 12);
    expect(spectralRadius([])).toBeNull();
  });
});

describe('margin wording', () => {
  const floors = marginFloors({});

  it('uses the service’s default floors unless the study set its own', () => {
    expect(floors).toEqual({ gainDb: 6, phaseDeg: 30, diskAlpha: 0.4 });
    expect(marginFloors({ marginFloor: { phaseDeg: 45 } })).toEqual({ gainDb: 6, phaseDeg: 45, diskAlpha: 0.4 });
    expect(floorWords('gainLower', floors)).toBe('at most −6 dB');
  });

  it('writes margins with their units and signs', () => {
    expect(marginWords('gainUpper', 8.04, true)).toBe('+8.0 dB');
    expect(marginWords('gainLower', -4.26, true)).toBe('−4.3 dB');
    expect(marginWords('phase', 41.27, true)).toBe('41.3°');
  });

  it('says "unlimited" when nothing limits a margin of a stable loop', () => {
    expect(marginWords('gainUpper', null, true)).toBe('unlimited');
    expect(marginWords('phase', null, true)).toBe('unlimited');
    expect(marginStanding('gainLower', null, true, floors)).toBe('meets');
  });

  it('says a margin is not meaningful when the closed loop is unstable, whatever the number', () => {
    expect(marginWords('gainUpper', null, false)).toBe('not meaningful (closed loop unstable)');
    expect(marginWords('disk', 0.5, false)).toBe('not meaningful (closed loop unstable)');
    expect(marginStanding('phase', 50, false, floors)).toBe('not-meaningful');
  });

  it('reads the disk margin as the gain and phase variations it covers', () => {
    // α = 2/3: gain factors 1/2 to 2 (±6.02 dB), phase ±2·atan(1/3) = ±36.87°.
    const v = diskVariations(2 / 3);
    expect(v.gainDb).toBeCloseTo(20 * Math.log10(2), 9);
    expect(v.phaseDeg).toBeCloseTo(36.8699, 3);
    expect(marginWords('disk', 2 / 3, true)).toBe('α = 0.67 (gain ±6.0 dB, phase ±37°)');
    expect(marginWords('disk', 2.5, true)).toBe('α = 2.50 (gain any increase, phase ±103°)');
  });

  it('marks margins below their floors', () => {
    expect(marginStanding('gainUpper', 5.9, true, floors)).toBe('below-floor');
    expect(marginStanding('gainUpper', 6, true, floors)).toBe('meets');
    expect(marginStanding('gainLower', -3, true, floors)).toBe('below-floor');
    expect(marginStanding('gainLower', -7, true, floors)).toBe('meets');
    expect(marginStanding('phase', 29, true, floors)).toBe('below-floor');
    expect(marginStanding('disk', 0.39, true, floors)).toBe('below-floor');
  });
});
