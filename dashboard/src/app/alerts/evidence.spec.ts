import { evidenceLines } from './evidence';

describe('evidenceLines', () => {
  it('turns nested evidence into readable names and values', () => {
    const lines = evidenceLines({ pValue: 3.2e-8, nisAverage: 4.312, bounds: { lower: 1.6, upper: 2.5 }, reasons: ['a', 'b'], silentForMs: 90_000 });
    expect(lines).toEqual([
      { key: 'pValue', label: 'p-value', value: '3.20e-8' },
      { key: 'nisAverage', label: 'NIS window mean', value: '4.31' },
      { key: 'bounds.lower', label: 'bounds › lower bound', value: '1.6' },
      { key: 'bounds.upper', label: 'bounds › upper bound', value: '2.5' },
      { key: 'reasons', label: 'reasons', value: 'a, b' },
      { key: 'silentForMs', label: 'silent for', value: '90 s' },
    ]);
  });

  it('reads epoch times and millisecond durations', () => {
    const at = Date.parse('2026-03-01T09:00:00Z');
    expect(evidenceLines({ lastReceivedAt: at, expectedIntervalMs: 1000 })).toEqual([
      { key: 'lastReceivedAt', label: 'last received at', value: new Date(at).toLocaleString() },
      { key: 'expectedIntervalMs', label: 'expected interval', value: '1 s' },
    ]);
  });

  it('numbers lists of records and says when a p-value underflowed', () => {
    expect(evidenceLines({ components: [{ pValue: 0, autocorrelation: [0.84321, 0.77] }] })).toEqual([
      { key: 'components.1.pValue', label: 'components › 1 › p-value', value: '≈ 0' },
      { key: 'components.1.autocorrelation', label: 'components › 1 › autocorrelation', value: '0.843, 0.77' },
    ]);
  });
});
