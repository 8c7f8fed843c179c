import fc from 'fast-check';
import {
  faultApplies,
  formatFaultSpec,
  isActive,
  parseDuration,
  parseFaultSpec,
  validateFault,
  type Fault,
  type FleetFault,
} from './faults';
import { malformedKinds } from './malformed';

describe('parseFaultSpec', () => {
  it('reads a bias on one estimator in a time window', () => {
    expect(parseFaultSpec('tractor-07/position:bias=2@60s-180s')).toEqual({
      unit: 'tractor-07',
      estimator: 'position',
      fault: { kind: 'bias', offset: 2, component: 0, when: { fromS: 60, toS: 180 } },
    });
  });

  it('reads parameters, minutes and a repeating window', () => {
    expect(parseFaultSpec('tractor-07/position:bias=-1.5,component=1,flicker=6s@1m-3m/5m').fault).toEqual({
      kind: 'bias',
      offset: -1.5,
      component: 1,
      flickerS: 6,
      when: { fromS: 60, toS: 180, everyS: 300 },
    });
  });

  it('reads a whole-unit fault from a time on, and sample-number windows', () => {
    expect(parseFaultSpec('cabinet-09:silence@90s')).toEqual({ unit: 'cabinet-09', fault: { kind: 'silence', when: { fromS: 90 } } });
    expect(parseFaultSpec('*:dropout=0.1@#100-#200').fault).toEqual({ kind: 'dropout', fraction: 0.1, when: { fromSeq: 100, toSeq: 200 } });
    expect(parseFaultSpec('cabinet-04/thermal:noise=3').fault).toEqual({ kind: 'noise', factor: 3 });
    expect(parseFaultSpec('cabinet-06/charge:malformed=0.5,kinds=not-json+not-finite').fault).toEqual({
      kind: 'malformed',
      fraction: 0.5,
      kinds: ['not-json', 'not-finite'],
    });
  });

  it.each([
    ['tractor-07', /not a fault/],
    ['Tractor-07:noise=2', /not <unit>/],
    ['tractor-07:wobble=2', /unknown fault "wobble"/],
    ['tractor-07:noise', /needs a value/],
    ['tractor-07:noise=-1', /positive number/],
    ['tractor-07:dropout=1.5', /fraction must be in \(0, 1\]/],
    ['tractor-07:silence=1', /takes no value/],
    ['tractor-07:noise=2,component=1', /takes no parameter "component"/],
    ['tractor-07:bias=2,component=0.5', /component must be an index/],
    ['tractor-07:bias=2@180s-60s', /ends \(60 s\) before it starts \(180 s\)/],
    ['tractor-07:bias=2@0s-4m/3m', /longer than its period/],
    ['tractor-07:bias=2@60s/5m', /needs an end/],
    ['tractor-07:bias=2@soon', /not a duration/],
    ['tractor-07:malformed=0.1,kinds=gibberish', /"gibberish" is not a kind/],
  ])('refuses %s, saying why', (spec, message) => {
    expect(() => parseFaultSpec(spec)).toThrow(message);
  });

  it('reads back what formatFaultSpec writes, for any valid fault', () => {
    const seconds = fc.integer({ min: 0, max: 7200 });
    const schedule = fc.oneof(
      fc.constant(undefined),
      fc.record({ fromS: seconds }),
      fc.tuple(seconds, fc.integer({ min: 1, max: 600 }), fc.integer({ min: 0, max: 600 })).map(([fromS, len, slack]) => ({
        fromS,
        toS: fromS + len,
        everyS: len + slack,
      })),
      fc.tuple(fc.integer({ min: 0, max: 1e6 }), fc.integer({ min: 1, max: 1e6 })).map(([fromSeq, len]) => ({ fromSeq, toSeq: fromSeq + len })),
    );
    const fraction = fc.double({ min: 0.001, max: 1, noNaN: true });
    const factor = fc.double({ min: 0.01, max: 100, noNaN: true });
    const effect = fc.oneof(
      factor.map((f) => ({ kind: 'noise' as const, factor: f })),
      factor.map((f) => ({ kind: 'qlow' as const, factor: f })),
      fc
        .record({ offset: fc.double({ min: -50, max: 50, noNaN: true }), component: fc.integer({ min: 0, max: 3 }), flicker: fc.option(fc.integer({ min: 1, max: 60 })) })
        .map(({ offset, component, flicker }) => ({ kind: 'bias' as const, offset: offset || 0 /* -0 is written as 0 */, component, ...(flicker === null ? {} : { flickerS: flicker }) })),
      fc.constant({ kind: 'stuck' as const }),
      fc.constant({ kind: 'silence' as const }),
      fraction.map((f) => ({ kind: 'dropout' as const, fraction: f })),
      fraction.map((f) => ({ kind: 'duplicate' as const, fraction: f })),
      fraction.map((f) => ({ kind: 'reorder' as const, fraction: f })),
      fc
        .tuple(fraction, fc.option(fc.subarray([...malformedKinds], { minLength: 1 })))
        .map(([f, kinds]) => ({ kind: 'malformed' as const, fraction: f, ...(kinds === null ? {} : { kinds }) })),
    );
    const target = fc.record({
      unit: fc.constantFrom('*', 'tractor-07', 'cabinet-09', 'synthetic-tractor-00001'),
      estimator: fc.option(fc.constantFrom('position', 'thermal', 'charge')),
    });
    fc.assert(
      fc.property(target, effect, schedule, ({ unit, estimator }, e, when) => {
        const fault: Fault = when === undefined ? e : { ...e, when };
        validateFault(fault);
        const ff: FleetFault = estimator === null ? { unit, fault } : { unit, estimator, fault };
        expect(parseFaultSpec(formatFaultSpec(ff))).toEqual(ff);
      }),
    );
  });
});

describe('isActive', () => {
  it('is on in a half-open time window', () => {
    const w = { fromS: 60, toS: 180 };
    expect([59.9, 60, 179.9, 180].map((t) => isActive(w, 1, t))).toEqual([false, true, true, false]);
  });

  it('repeats a window every period', () => {
    // on 2 minutes in every 5, from minute 1: [60, 180), [360, 480), …
    const w = { fromS: 60, toS: 180, everyS: 300 };
    expect([30, 60, 179, 180, 359, 360, 479, 480, 660].map((t) => isActive(w, 1, t))).toEqual([
      false, true, true, false, false, true, true, false, true,
    ]);
  });

  it('counts sample numbers too, and is always on without a schedule', () => {
    const w = { fromSeq: 100, toSeq: 200 };
    expect([99, 100, 199, 200].map((k) => isActive(w, k, 0))).toEqual([false, true, true, false]);
    expect(isActive(undefined, 1, 0)).toBe(true);
  });
});

describe('fault targets and durations', () => {
  it('aims a fault at one estimator, a whole unit or every unit', () => {
    const one = parseFaultSpec('tractor-07/position:stuck');
    const unit = parseFaultSpec('cabinet-09:silence');
    const all = parseFaultSpec('*/thermal:noise=2');
    expect([faultApplies(one, 'tractor-07', 'position'), faultApplies(one, 'tractor-08', 'position')]).toEqual([true, false]);
    expect([faultApplies(unit, 'cabinet-09', 'thermal'), faultApplies(unit, 'cabinet-09', 'charge')]).toEqual([true, true]);
    expect([faultApplies(all, 'cabinet-01', 'thermal'), faultApplies(all, 'cabinet-01', 'charge')]).toEqual([true, false]);
  });

  it('reads durations in ms, s, m and h', () => {
    expect(['500ms', '90', '90s', '1.5m', '2h'].map(parseDuration)).toEqual([0.5, 90, 90, 90, 7200]);
  });
});
