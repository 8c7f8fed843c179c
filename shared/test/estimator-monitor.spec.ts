import fc from 'fast-check';
import { EstimatorMonitor, ingestInnovationSample, resolveMonitorConfig } from '../src/monitor/estimator-monitor';
import { InnovationSampleError } from '../src/sample/innovation-sample';
import { Random } from './support/random';

function sample(seq: number, random: Random, scale = 1, withReference = false): Record<string, unknown> {
  // S = [[2, 0.5], [0.5, 1]]; ν = L·z with L its Cholesky factor
  const l00 = Math.sqrt(2);
  const l10 = 0.5 / l00;
  const l11 = Math.sqrt(1 - l10 * l10);
  const z0 = random.normal() * Math.sqrt(scale);
  const z1 = random.normal() * Math.sqrt(scale);
  const raw: Record<string, unknown> = { seq, t: seq * 0.1, nu: [l00 * z0, l10 * z0 + l11 * z1], S: [[2, 0.5], [0.5, 1]] };
  if (withReference) {
    raw['e'] = [random.normal(), 2 * random.normal(), 0.5 * random.normal()];
    raw['P'] = [[1, 0, 0], [0, 4, 0], [0, 0, 0.25]];
  }
  return raw;
}

describe('EstimatorMonitor', () => {
  const config = { windowLength: 50, lags: 5, arl0: 2000 };

  it('fills in defaults and rejects settings that cannot work', () => {
    const c = resolveMonitorConfig();
    expect(c).toMatchObject({ windowLength: 100, alpha: 0.001, alphaMarginal: 0.01, lags: 10, drift: 'cusum', arl0: 10000, holdSamples: 100 });
    expect(resolveMonitorConfig({ windowLength: 40 }).holdSamples).toBe(40);
    expect(() => resolveMonitorConfig({ lags: 100 })).toThrow(/lags/);
    expect(() => resolveMonitorConfig({ alpha: 0.1, alphaMarginal: 0.05 })).toThrow(/alphaMarginal/);
    expect(() => resolveMonitorConfig({ cusumShiftDown: 2 })).toThrow(/cusumShiftDown/);
  });

  it('validates and updates from a plain parsed sample, and reports every check', () => {
    const monitor = new EstimatorMonitor(config);
    const random = new Random(1);
    for (let seq = 0; seq < 120; seq++) expect(monitor.ingest(sample(seq, random, 1, true))).toBe('in_order');
    const report = monitor.report();
    expect(report.samples).toBe(120);
    expect(report.m).toBe(2);
    expect(report.n).toBe(3);
    expect(report.last).toMatchObject({ seq: 119, t: 11.9 });
    expect(report.checks!.nis).toMatchObject({ ready: true, samples: 50, dof: 100 });
    expect(report.checks!.nees).toMatchObject({ ready: true, dof: 150 });
    expect(report.checks!.bias.components).toHaveLength(2);
    expect(report.checks!.whiteness.components[0].autocorrelation).toHaveLength(5);
    expect(report.checks!.cusum!.up.threshold).toBeGreaterThan(0);
    expect(report.checks!.pageHinkley).toBeNull();
    expect(report.checks!.sequence).toMatchObject({ accepted: 120, lost: 0 });
    expect(report.pValue).toBeGreaterThan(0);
    expect(report.pValue).toBeLessThanOrEqual(1);
    expect(JSON.parse(JSON.stringify(report))).toEqual(report);
  });

  it('rejects an invalid sample with its code and leaves the state untouched', () => {
    const monitor = new EstimatorMonitor(config);
    const random = new Random(2);
    for (let seq = 0; seq < 10; seq++) monitor.ingest(sample(seq, random));
    const before = JSON.stringify(monitor.serialize());
    const bad = { ...sample(10, random), S: [[2, 0.5], [0.4, 1]] };
    expect(() => monitor.ingest(bad)).toThrow(InnovationSampleError);
    const result = ingestInnovationSample(monitor, bad);
    expect(result.ok).toBe(false);
    if (!result.ok) expect(result.error.code).toBe('not_symmetric');
    const wrongSize = { seq: 10, nu: [1, 2, 3], S: [[1, 0, 0], [0, 1, 0], [0, 0, 1]] };
    const mismatch = ingestInnovationSample(monitor, wrongSize);
    expect(!mismatch.ok && mismatch.error.code).toBe('dimension_mismatch');
    expect(JSON.stringify(monitor.serialize())).toBe(before);
    const good = ingestInnovationSample(monitor, sample(10, random));
    expect(good).toMatchObject({ ok: true, outcome: 'in_order', verdict: 'consistent' });
  });

  it('does not let an invalid first sample fix the measurement dimension', () => {
    const monitor = new EstimatorMonitor(config);
    expect(() => monitor.ingest({ seq: 0, nu: [1, 2, 3], S: [[1, 0, 0], [0, 1, 0], [0, 0, -1]] })).toThrow(InnovationSampleError);
    expect(monitor.dimension).toBe(0);
    expect(monitor.ingest(sample(1, new Random(9)))).toBe('in_order');
    expect(monitor.dimension).toBe(2);
  });

  it('exposes the drift statistics and whether the last NIS left its single-sample interval, for the traces', () => {
    const monitor = new EstimatorMonitor(config);
    expect(monitor.cusumStatistics()).toEqual({ up: 0, down: 0 });
    monitor.ingest({ seq: 0, nu: [4, 0], S: [[1, 0], [0, 1]] }); // NIS 16: beyond χ²₂(0.995) = 10.6, below the CUSUM threshold
    expect(monitor.lastExceeded).toBe(true);
    expect(monitor.report().checks!.cusum!.up.threshold).toBeGreaterThan(16);
    expect(monitor.cusumStatistics().up).toBeCloseTo(16 - monitor.report().checks!.cusum!.up.reference, 12);
    monitor.ingest({ seq: 1, nu: [1, 1], S: [[1, 0], [0, 1]] });
    expect(monitor.lastExceeded).toBe(false);
    const ph = new EstimatorMonitor({ ...config, drift: 'page-hinkley' });
    ph.ingest({ seq: 0, nu: [0.1, 0.1], S: [[1, 0], [0, 1]] });
    expect(ph.cusumStatistics().down).toBeCloseTo(2 - 0.02 - 0.5, 12); // μ₀ − ε − δ⁻/2 with δ⁻ = m/2
  });

  it('counts duplicates and late samples without feeding them to the statistics', () => {
    const monitor = new EstimatorMonitor(config);
    const random = new Random(3);
    for (let seq = 0; seq < 10; seq++) monitor.ingest(sample(seq, random));
    expect(monitor.ingest(sample(12, random))).toBe('gap');
    expect(monitor.ingest(sample(12, random))).toBe('duplicate');
    expect(monitor.ingest(sample(11, random))).toBe('late');
    const report = monitor.report();
    expect(report.samples).toBe(11);
    expect(report.checks!.sequence).toMatchObject({ gaps: 1, lost: 1, duplicates: 1, late: 1 });
    expect(report.verdict).toBe('marginal');
    expect(report.reasons[0]).toMatch(/^sequence: late at seq 11/);
  });

  it('says inconsistent, with the reason, when the noise is twice what the filter believes', () => {
    const monitor = new EstimatorMonitor(config);
    const random = new Random(4);
    for (let seq = 0; seq < 200; seq++) monitor.ingest(sample(seq, random, seq < 100 ? 1 : 2));
    const report = monitor.report();
    expect(report.verdict).toBe('inconsistent');
    expect(report.reasons.some((r) => r.startsWith('NIS window: average') && r.includes('above'))).toBe(true);
    expect(report.pValue).toBeLessThan(1e-3);
  });

  it('keeps the NEES out of the verdict unless asked (consecutive NEES values are correlated)', () => {
    const make = (neesInVerdict: boolean) => {
      const monitor = new EstimatorMonitor({ ...config, neesInVerdict });
      const random = new Random(5);
      for (let seq = 0; seq < 60; seq++) {
        const raw = sample(seq, random, 1, true);
        raw['e'] = (raw['e'] as number[]).map((x) => 3 * x); // NEES 9× too large
        monitor.ingest(raw);
      }
      return monitor;
    };
    expect(make(false).verdict).toBe('consistent');
    expect(make(false).report().checks!.nees!.verdict).toBe('inconsistent');
    expect(make(true).verdict).toBe('inconsistent');
  });

  it('uses every neesStride-th reference error', () => {
    const monitor = new EstimatorMonitor({ ...config, neesStride: 3 });
    const random = new Random(6);
    for (let seq = 0; seq < 30; seq++) monitor.ingest(sample(seq, random, 1, seq % 2 === 0));
    expect(monitor.report().checks!.nees!.total).toBe(5); // 15 samples with e, every 3rd
  });

  it('runs Page–Hinkley instead of, or as well as, the CUSUM', () => {
    const both = new EstimatorMonitor({ ...config, drift: 'both' });
    const ph = new EstimatorMonitor({ ...config, drift: 'page-hinkley' });
    const random = new Random(7);
    for (let seq = 0; seq < 5; seq++) {
      const raw = sample(seq, random);
      both.ingest(raw);
      ph.ingest(raw);
    }
    expect(both.report().checks!.cusum).not.toBeNull();
    expect(both.report().checks!.pageHinkley).not.toBeNull();
    expect(ph.report().checks!.cusum).toBeNull();
    expect(ph.report().checks!.pageHinkley!.mu0).toBe(2);
  });

  it('restores an empty monitor and one with fixed dimensions', () => {
    const empty = EstimatorMonitor.restore(JSON.parse(JSON.stringify(new EstimatorMonitor(config).serialize())));
    expect(empty.report().checks).toBeNull();
    const fixed = new EstimatorMonitor({ ...config, m: 2, n: 3 });
    const restored = EstimatorMonitor.restore(JSON.parse(JSON.stringify(fixed.serialize())));
    expect(restored.report().m).toBe(2);
    expect(restored.report().n).toBe(3);
    expect(() => EstimatorMonitor.restore({ kind: 'estimator-monitor', version: 2 })).toThrow(/version/);
  });
});

describe('EstimatorMonitor checkpoints, property-based', () => {
  it('gives identical future verdicts and reports after serialize → JSON → restore, at any point of any stream', () => {
    fc.assert(
      fc.property(
        fc.record({
          seed: fc.nat(),
          split: fc.integer({ min: 0, max: 260 }),
          after: fc.integer({ min: 1, max: 120 }),
          drift: fc.constantFrom('cusum' as const, 'page-hinkley' as const, 'both' as const),
          scaleAfter: fc.constantFrom(0.5, 1, 2.5),
          withReference: fc.boolean(),
          skips: fc.array(fc.integer({ min: 0, max: 400 }), { maxLength: 5 }),
        }),
        ({ seed, split, after, drift, scaleAfter, withReference, skips }) => {
          const random = new Random(seed);
          const a = new EstimatorMonitor({ windowLength: 30, lags: 4, arl0: 500, drift, neesInVerdict: withReference });
          let seq = 0;
          const next = (scale: number) => {
            seq += skips.includes(seq) ? 3 : 1; // some gaps
            return sample(seq, random, scale, withReference);
          };
          for (let k = 0; k < split; k++) a.ingest(next(1));
          const b = EstimatorMonitor.restore(JSON.parse(JSON.stringify(a.serialize())));
          expect(JSON.stringify(b.serialize())).toBe(JSON.stringify(a.serialize()));
          for (let k = 0; k < after; k++) {
            const raw = next(scaleAfter);
            if (k % 17 === 5) raw['seq'] = (raw['seq'] as number) - 2; // a late or duplicate sample now and then
            expect(b.ingest(raw)).toBe(a.ingest(raw));
            expect(b.verdict).toBe(a.verdict);
          }
          expect(JSON.stringify(b.report())).toBe(JSON.stringify(a.report()));
        },
      ),
      { numRuns: 60 },
    );
  });
});

describe('EstimatorMonitor.markStored (catching up after a restart without a last checkpoint)', () => {
  const S = [[0.09, 0], [0, 0.09]];
  const t0 = 1_780_000_000_000;
  const feed = (m: EstimatorMonitor, from: number, to: number) => {
    for (let seq = from; seq <= to; seq++) m.ingest({ seq, t: t0 + seq * 100, nu: [0.1 * Math.sin(seq), 0.1 * Math.cos(seq)], S });
  };

  it('takes the stored numbers, so the next sample shows no gap and a resend of a stored one is a duplicate', () => {
    const live = new EstimatorMonitor({ m: 2 });
    feed(live, 1, 100);
    const restored = EstimatorMonitor.restore(JSON.parse(JSON.stringify(live.serialize())));
    expect(restored.highestSeq).toBe(100);
    const stored = Array.from({ length: 50 }, (_, i) => ({ seq: 101 + i, t: t0 + (101 + i) * 100 }));
    expect(restored.markStored(stored)).toBe(50);
    expect(restored.highestSeq).toBe(150);
    expect(restored.ingest({ seq: 151, t: t0 + 15_100, nu: [0.01, 0.02], S })).toBe('in_order');
    // A sample committed but not acknowledged before the stop comes again with its own time.
    expect(restored.ingest({ seq: 140, t: t0 + 14_000, nu: [0.01, 0.02], S })).toBe('duplicate');
    expect(restored.report().checks?.sequence.lost).toBe(0);
  });

  it('counts a real hole among the stored samples as lost, and is a no-op before any sample', () => {
    expect(new EstimatorMonitor().markStored([{ seq: 5, t: t0 }])).toBe(0); // dimensions not known yet: no checks
    const m = new EstimatorMonitor({ m: 2 });
    feed(m, 1, 10);
    m.markStored([{ seq: 11, t: t0 + 1100 }, { seq: 14, t: t0 + 1400 }]);
    expect(m.report().checks?.sequence.lost).toBe(2);
  });
});
