// Hostile payloads for the MQTT side, as fast-check arbitraries, and what the service must
// do with each one.
//
// A case is generated as a template: structured payloads carry sequence-number slots that
// are filled in when the case is sent, so every sample a case could get stored has its own
// sequence number (no case is ever a duplicate of another, whatever order the broker takes
// them in). `materialize` turns a case into the bytes to publish and the expectation:
// how many samples of it get stored and which quarantine reasons it gets, worked out in
// this process from the shared payload schema and the shared sample validation (the
// EstimatorMonitor the service runs), following the order the README gives: size, estimator,
// JSON, schema, then per sample time, clock window and the sample checks.
//
// Besides that model, each structured case carries the generator's own intent (this sample
// is valid / is not), which is checked against the model: a disagreement there means the
// shared validation accepts what it should not (or refuses what it should take), found
// without the broker.
import { Ajv2020 } from 'ajv/dist/2020';
import type { ValidateFunction } from 'ajv';
import fc from 'fast-check';
import { innovationsTopic } from '../../ingest/src/broker/topics';
import { EstimatorMonitor, ingestInnovationSample } from '../../shared/src/index';
import payloadSchema from '../../shared/src/payload/innovation-payload.schema.json';

export const MAX_PAYLOAD_BYTES = 256 * 1024;
export const QUARANTINE_PAYLOAD_BYTES = 4096;
const MAX_FUTURE_MS = 5 * 60_000;
const MAX_AGE_MS = 14 * 86_400_000;
const DAY = 86_400_000;

// ------------------------------------------------------------------ RFC 3339 (the schema's "date-time")

const RFC3339 = /^(\d{4})-(\d{2})-(\d{2})[Tt ](\d{2}):(\d{2}):(\d{2})(\.\d+)?(?:[Zz]|([+-])(\d{2}):(\d{2}))$/;

function daysInMonth(year: number, month: number): number {
  if (month === 2) return year % 4 === 0 && (year % 100 !== 0 || year % 400 === 0) ? 29 : 28;
  return [4, 6, 9, 11].includes(month) ? 30 : 31;
}

/**
 * Epoch milliseconds of an RFC 3339 date-time (RFC 3339 §5.6: full-date "T" full-time, a
 * time offset required; "t", "z" and a space for "T" allowed, §5.6 note), or NaN. A leap
 * second (:60) counts as the first instant of the next minute. Written here on its own,
 * not shared with the service, so the two can disagree.
 */
export function rfc3339Ms(s: string): number {
  const m = RFC3339.exec(s);
  if (!m) return Number.NaN;
  const [year, month, day, hour, minute, second] = m.slice(1, 7).map(Number);
  if (month < 1 || month > 12 || day < 1 || day > daysInMonth(year, month) || hour > 23 || minute > 59 || second > 60) return Number.NaN;
  let offsetMin = 0;
  if (m[8]) {
    const oh = Number(m[9]);
    const om = Number(m[10]);
    if (oh > 23 || om > 59) return Number.NaN;
    offsetMin = (m[8] === '-' ? -1 : 1) * (oh * 60 + om);
  }
  const d = new Date(0);
  d.setUTCFullYear(year, month - 1, day);
  d.setUTCHours(hour, minute, second, 0);
  const frac = m[7] ? Number(`0${m[7]}`) * 1000 : 0;
  return d.getTime() + frac - offsetMin * 60_000;
}

function pad(n: number, width = 2): string {
  return String(n).padStart(width, '0');
}

/** An RFC 3339 rendering of `ms` at a UTC offset of `offsetMin` minutes. */
function renderWithOffset(ms: number, offsetMin: number, sep = 'T', fracDigits = 3): string {
  const local = new Date(ms + offsetMin * 60_000);
  const frac = fracDigits > 0 ? `.${pad(local.getUTCMilliseconds(), 3)}${'0'.repeat(Math.max(0, fracDigits - 3))}`.slice(0, fracDigits + 1) : '';
  const sign = offsetMin < 0 ? '-' : '+';
  const a = Math.abs(offsetMin);
  const zone = offsetMin === 0 && sep === 'T' ? 'Z' : `${sign}${pad(Math.floor(a / 60))}:${pad(a % 60)}`;
  return (
    `${pad(local.getUTCFullYear(), 4)}-${pad(local.getUTCMonth() + 1)}-${pad(local.getUTCDate())}${sep}` +
    `${pad(local.getUTCHours())}:${pad(local.getUTCMinutes())}:${pad(local.getUTCSeconds())}${frac}${zone}`
  );
}

// ------------------------------------------------------------------ targets and cases

export interface Target {
  unit: string;
  estimator: string;
  /** Measurement dimension (registered), and the reference-error size the warm-up fixed. */
  m: number;
  n: number;
  /** False: an estimator key the unit does not have (unknown_estimator). */
  registered: boolean;
}

type Intent = 'valid' | 'invalid' | 'unknown';

/** A sequence-number slot, filled when the case is sent. */
class SeqSlot {
  readonly slot = true;
}
/** A JSON token written as is (NaN, Infinity, 1e999 …). */
class Raw {
  constructor(readonly text: string) {}
}

export interface FuzzCase {
  kind: 'bytes' | 'json' | 'near' | 'single' | 'batch' | 'deep' | 'huge' | 'unknown-estimator';
  target: Target;
  /** Structured payload (with SeqSlot and Raw inside), or fixed bytes. */
  doc?: unknown;
  bytes?: Uint8Array;
  /** Text-level changes made after serializing. */
  text?: 'indent' | 'duplicate-key' | 'bom' | 'trailing-garbage' | 'trailing-space' | 'invalid-utf8-in-extra';
  /** For 'deep' and 'huge': how deep, how big. */
  size?: number;
  /** What the generator meant: the whole message, and each sample. */
  messageIntent: Intent;
  sampleIntents: Intent[];
  mutations: string[];
}

// ------------------------------------------------------------------ arbitraries

const smallNumber = fc.double({ min: -100, max: 100, noNaN: true, noDefaultInfinity: true });
const logScale = fc
  .tuple(fc.integer({ min: -6, max: 6 }), fc.double({ min: 1, max: 9.99, noNaN: true, noDefaultInfinity: true }))
  .map(([e, x]) => x * 10 ** e);

const vector = (k: number) => fc.array(smallNumber, { minLength: k, maxLength: k });

/** A symmetric positive definite k×k matrix: scales times a diagonally dominant correlation matrix. */
const spd = (k: number) =>
  fc
    .tuple(
      fc.array(logScale, { minLength: k, maxLength: k }),
      fc.array(fc.double({ min: -0.9, max: 0.9, noNaN: true, noDefaultInfinity: true }), { minLength: (k * (k - 1)) / 2, maxLength: (k * (k - 1)) / 2 }),
    )
    .map(([d, rho]) => {
      const S = d.map((di) => d.map(() => 0 * di));
      let r = 0;
      for (let i = 0; i < k; i++) {
        S[i][i] = d[i];
        for (let j = 0; j < i; j++) {
          const v = (rho[r++] / Math.max(1, k - 1)) * Math.sqrt(d[i] * d[j]);
          S[i][j] = v;
          S[j][i] = v;
        }
      }
      return S;
    });

/** A lower Cholesky factor with a comfortably positive diagonal. */
const cholesky = (k: number) =>
  fc
    .tuple(fc.array(logScale, { minLength: k, maxLength: k }), fc.array(fc.double({ min: -2, max: 2, noNaN: true, noDefaultInfinity: true }), { minLength: k * k, maxLength: k * k }))
    .map(([d, off]) =>
      d.map((_, i) => d.map((__, j) => (j === i ? Math.sqrt(d[i]) : j < i ? off[i * k + j] * Math.sqrt(d[i]) : 0))),
    );

type TimeRendering =
  | { kind: 'number' }
  | { kind: 'iso' }
  | { kind: 'offset'; offsetMin: number }
  | { kind: 'lower' }
  | { kind: 'space'; offsetMin: number }
  | { kind: 'fraction'; digits: number };

const validTime = fc.record({
  agoMs: fc.integer({ min: 1000, max: 12 * DAY }),
  render: fc.oneof(
    { weight: 5, arbitrary: fc.constant<TimeRendering>({ kind: 'number' }) },
    { weight: 3, arbitrary: fc.constant<TimeRendering>({ kind: 'iso' }) },
    { weight: 1, arbitrary: fc.constantFrom(-720, -330, -60, 0, 60, 345, 840).map((offsetMin): TimeRendering => ({ kind: 'offset', offsetMin })) },
    { weight: 1, arbitrary: fc.constant<TimeRendering>({ kind: 'lower' }) },
    { weight: 1, arbitrary: fc.constantFrom(0, 120).map((offsetMin): TimeRendering => ({ kind: 'space', offsetMin })) },
    { weight: 1, arbitrary: fc.integer({ min: 1, max: 9 }).map((digits): TimeRendering => ({ kind: 'fraction', digits })) },
  ),
});
type ValidTime = { agoMs: number; render: TimeRendering };

/** A time placeholder: rendered against the clock when the case is sent. */
class TimeSlot {
  constructor(readonly t: ValidTime) {}
}

interface SampleDoc {
  seq?: unknown;
  t?: unknown;
  nu?: unknown;
  S?: unknown;
  L?: unknown;
  e?: unknown;
  P?: unknown;
  [extra: string]: unknown;
}

const sampleFor = (m: number, n: number) =>
  fc
    .record({
      nu: vector(m),
      cov: fc.oneof({ weight: 4, arbitrary: spd(m).map((S) => ({ S })) }, { weight: 1, arbitrary: cholesky(m).map((L) => ({ L })) }),
      t: validTime,
      ref: n > 0 ? fc.oneof({ weight: 4, arbitrary: fc.constant(null) }, { weight: 1, arbitrary: fc.record({ e: vector(n), P: spd(n) }) }) : fc.constant(null),
    })
    .map(({ nu, cov, t, ref }): SampleDoc => ({ seq: new SeqSlot(), t: new TimeSlot(t), nu, ...cov, ...(ref ?? {}) }));

/** A mutation of one sample or of the message; `level` says what it breaks. */
interface Mutation {
  name: string;
  pick: number;
  value: unknown;
}

/** A nesting depth, log-uniform: mostly hundreds, now and then tens of thousands. */
const depth = (max: number) => fc.double({ min: Math.log(64), max: Math.log(max), noNaN: true }).map((x) => Math.round(Math.exp(x)));
const deepValue = depth(20_000).map((d) => ({ deep: d }));

const mutation: fc.Arbitrary<Mutation> = fc.oneof(
  ...[
    'nu-longer',
    'nu-shorter',
    'nu-empty',
    'nu-17',
    'S-wrong-dim',
    'S-ragged',
    'S-asymmetric',
    'S-negative-diagonal',
    'S-zero',
    'S-singular',
    'S-correlation-over-1',
    'L-upper',
    'L-negative-diagonal',
    'S-and-L',
    'neither-S-nor-L',
    'e-without-P',
    'P-without-e',
    'e-wrong-size',
    'P-not-positive-definite',
    'raw-nan',
    'raw-infinity',
    'raw-overflow',
    'huge-nu',
    'nis-beyond-float32',
    'nis-below-float32',
    'tiny-nu',
    'huge-S',
    'seq-negative',
    'seq-too-big',
    'seq-fraction',
    'seq-huge',
    'seq-missing',
    't-missing',
    'nu-missing',
    'extra-field',
    'rev-valid',
    'rev-zero',
    'v-2',
    'v-string',
    'v-missing',
  ].map((name) => fc.record({ name: fc.constant(name), pick: fc.nat(), value: fc.constant<unknown>(null) })),
  fc.record({
    name: fc.constantFrom('nan-string-nu', 'nan-string-S', 'nan-string-t', 'nan-string-seq'),
    pick: fc.nat(),
    value: fc.constantFrom('NaN', 'Infinity', '-Infinity', '1e3', '0x10', ''),
  }),
  fc.record({ name: fc.constant('wrong-type'), pick: fc.nat(), value: fc.jsonValue({ maxDepth: 3 }) }),
  fc.record({ name: fc.constant('deep-field'), pick: fc.nat(), value: deepValue }),
  fc.record({
    name: fc.constant('time-invalid'),
    pick: fc.nat(),
    value: fc.constantFrom('no-offset', 'date-only', 'utc-string', 'date-string', 'day-overflow', 'hour-24', 'epoch-string', 'offset-25h', 'second-61'),
  }),
  fc.record({ name: fc.constant('time-far'), pick: fc.nat(), value: fc.constantFrom(-1, 1, 2, 3, 4) }),
  fc.record({ name: fc.constant('time-number'), pick: fc.nat(), value: fc.double({ noNaN: true }) }),
);

const nearKeys = ['v', 'seq', 't', 'nu', 'S', 'L', 'e', 'P', 'rev', 'samples'];

export function caseArbitrary(targets: Target[]): fc.Arbitrary<FuzzCase> {
  const registered = targets.filter((t) => t.registered);
  const unregistered = targets.filter((t) => !t.registered);
  const anyTarget = fc.constantFrom(...registered);
  const none = { messageIntent: 'invalid' as Intent, sampleIntents: [] as Intent[], mutations: [] as string[] };

  const bytes = fc
    .record({ target: anyTarget, bytes: fc.uint8Array({ maxLength: 400 }) })
    .map(({ target, bytes }): FuzzCase => ({ kind: 'bytes', target, bytes, ...none, messageIntent: 'unknown' }));
  const json = fc
    .record({ target: anyTarget, value: fc.jsonValue({ maxDepth: 4 }) })
    .map(({ target, value }): FuzzCase => ({ kind: 'json', target, doc: value, ...none, messageIntent: 'unknown' }));
  const near = fc
    .record({
      target: anyTarget,
      value: fc.dictionary(fc.oneof({ weight: 6, arbitrary: fc.constantFrom(...nearKeys) }, fc.string({ maxLength: 6 })), fc.jsonValue({ maxDepth: 3 }), {
        maxKeys: 8,
      }),
    })
    .map(({ target, value }): FuzzCase => ({ kind: 'near', target, doc: value, ...none, messageIntent: 'unknown' }));
  const deep = fc
    .record({ target: anyTarget, depth: depth(60_000), shape: fc.constantFrom('array', 'object') })
    .map(({ target, depth, shape }): FuzzCase => ({ kind: 'deep', target, size: shape === 'array' ? depth : -depth, ...none }));
  const huge = fc
    .record({ target: anyTarget, size: fc.integer({ min: MAX_PAYLOAD_BYTES + 1, max: 400_000 }) })
    .map(({ target, size }): FuzzCase => ({ kind: 'huge', target, size, ...none }));
  const unknownEstimator = fc
    .record({ target: fc.constantFrom(...(unregistered.length > 0 ? unregistered : registered)), sample: sampleFor(2, 0) })
    .map(({ target, sample }): FuzzCase => ({ kind: 'unknown-estimator', target, doc: { v: 1, ...sample }, ...none }));

  // built once per estimator (not in a chain, which would build them again for every case)
  const mutations = fc.oneof({ weight: 1, arbitrary: fc.constant<Mutation[]>([]) }, { weight: 3, arbitrary: fc.array(mutation, { minLength: 1, maxLength: 3 }) });
  const textChange = fc.oneof(
    { weight: 20, arbitrary: fc.constant(undefined) },
    { weight: 1, arbitrary: fc.constantFrom('indent', 'duplicate-key', 'bom', 'trailing-garbage', 'trailing-space', 'invalid-utf8-in-extra' as const) },
  );
  const structuredFor = (target: Target) => {
    const sample = sampleFor(target.m, target.n);
    const single = fc
      .record({ sample, mutations: mutations.map((list) => list.slice(0, 1)), text: textChange })
      .map(({ sample: s, mutations: mu, text }) => buildStructured(target, false, [s], mu, text));
    const batch = fc
      .record({ samples: fc.array(sample, { minLength: 1, maxLength: 12 }), mutations, text: textChange })
      .map(({ samples, mutations: mu, text }) => buildStructured(target, true, samples, mu, text));
    return fc.oneof({ weight: 3, arbitrary: single }, { weight: 1, arbitrary: batch });
  };
  const structured = fc.oneof(...registered.map(structuredFor));

  return fc.oneof(
    { weight: 200, arbitrary: bytes },
    { weight: 160, arbitrary: json },
    { weight: 200, arbitrary: near },
    { weight: 1400, arbitrary: structured },
    { weight: 40, arbitrary: deep },
    { weight: 20, arbitrary: unknownEstimator },
    // ~1 in 2,000: a message over the payload limit (kept rare: each is 0.25–0.4 MB on the wire)
    { weight: 1, arbitrary: huge },
  );
}

// ------------------------------------------------------------------ mutations

function worst(a: Intent, b: Intent): Intent {
  if (a === 'invalid' || b === 'invalid') return 'invalid';
  if (a === 'unknown' || b === 'unknown') return 'unknown';
  return 'valid';
}

/** A deep copy of plain objects and arrays (the slot objects inside are kept as they are). */
function clone<T>(v: T): T {
  if (Array.isArray(v)) return v.map(clone) as T;
  if (v && typeof v === 'object' && Object.getPrototypeOf(v) === Object.prototype) {
    const out: Record<string, unknown> = {};
    for (const [k, x] of Object.entries(v)) out[k] = clone(x);
    return out as T;
  }
  return v;
}

function buildStructured(target: Target, batch: boolean, generated: SampleDoc[], generatedMutations: Mutation[], text: FuzzCase['text']): FuzzCase {
  const { m, n } = target;
  const samples = clone(generated);
  const list = batch ? samples : samples.slice(0, 1);
  // One mutation per sample at most (and one on the message itself), so that no mutation
  // can undo another and the intent stays known; the single form is one sample.
  const touched = new Set<number>();
  const mutations = generatedMutations.filter((mu) => {
    const at = TOP_LEVEL.has(mu.name) ? -1 : mu.pick % list.length;
    const slot = batch ? at : 0;
    if (touched.has(slot)) return false;
    touched.add(slot);
    return true;
  });
  const sampleIntents: Intent[] = list.map(() => 'valid');
  let messageIntent: Intent = 'valid';
  const top: Record<string, unknown> = batch ? { v: 1, samples: list } : { v: 1, ...list[0] };
  // in the single form the sample's fields sit on the message itself
  const sampleAt = (i: number): SampleDoc => (batch ? list[i] : (top as SampleDoc));
  const names: string[] = [];
  for (const mu of mutations) {
    const i = mu.pick % list.length;
    const s = sampleAt(i);
    names.push(mu.name);
    // what the mutation breaks: one sample, the whole message, nothing, or not known (at the sample's or the message's level)
    let breaks: 'sample' | 'message' | 'nothing' | 'unknown-sample' | 'unknown-message' = 'sample';
    const S = s.S as number[][] | undefined;
    const covKey = s.S !== undefined ? 'S' : 'L';
    switch (mu.name) {
      case 'nu-longer':
        if (m + 1 > 16) breaks = 'message';
        s.nu = [...(s.nu as number[]), 0.5];
        break;
      case 'nu-shorter':
        if (m < 2) {
          s.nu = [];
          breaks = 'message';
        } else s.nu = (s.nu as number[]).slice(1);
        break;
      case 'nu-empty':
        s.nu = [];
        breaks = 'message';
        break;
      case 'nu-17':
        s.nu = Array.from({ length: 17 }, (_, k) => k / 10);
        breaks = 'message';
        break;
      case 'S-wrong-dim':
        delete s.L;
        s.S = Array.from({ length: m + 1 }, (_, r) => Array.from({ length: m + 1 }, (__, c) => (r === c ? 1 : 0)));
        break;
      case 'S-ragged': {
        const M = (s[covKey] as number[][]).map((row) => [...row]);
        M[M.length - 1].push(0);
        s[covKey] = M;
        break;
      }
      case 'S-asymmetric':
        if (!S || m < 2) {
          breaks = 'nothing';
          break;
        }
        s.S = S.map((row) => [...row]);
        (s.S as number[][])[1][0] = S[0][1] + 0.1 * Math.sqrt(S[0][0] * S[1][1]);
        break;
      case 'S-negative-diagonal':
        delete s.L;
        s.S = (S ?? identity(m)).map((row, r) => row.map((v, c) => (r === c && r === 0 ? -Math.abs(v) - 1e-3 : v)));
        break;
      case 'S-zero':
        delete s.L;
        s.S = identity(m).map((row) => row.map(() => 0));
        break;
      case 'S-singular':
        if (m < 2) {
          breaks = 'nothing';
          break;
        }
        delete s.L;
        s.S = [
          [4, 2, ...Array(m - 2).fill(0)],
          [2, 1, ...Array(m - 2).fill(0)],
          ...Array.from({ length: m - 2 }, (_, r) => Array.from({ length: m }, (__, c) => (c === r + 2 ? 1 : 0))),
        ];
        break;
      case 'S-correlation-over-1':
        if (m < 2) {
          breaks = 'nothing';
          break;
        }
        delete s.L;
        s.S = identity(m).map((row, r) => row.map((v, c) => (r + c === 1 ? 1.5 : v)));
        break;
      case 'L-upper':
        if (m < 2) {
          breaks = 'nothing';
          break;
        }
        delete s.S;
        s.L = identity(m).map((row, r) => row.map((v, c) => (r === 0 && c === 1 ? 0.3 : v)));
        break;
      case 'L-negative-diagonal':
        delete s.S;
        s.L = identity(m).map((row, r) => row.map((v, c) => (r === c && r === m - 1 ? -1 : v)));
        break;
      case 'S-and-L':
        s.S = identity(m);
        s.L = identity(m);
        breaks = 'message';
        break;
      case 'neither-S-nor-L':
        delete s.S;
        delete s.L;
        breaks = 'message';
        break;
      case 'e-without-P':
        s.e = Array(Math.max(1, n)).fill(0.1);
        delete s.P;
        breaks = 'message';
        break;
      case 'P-without-e':
        s.P = identity(Math.max(1, n));
        delete s.e;
        breaks = 'message';
        break;
      case 'e-wrong-size':
        if (n === 0 || n + 1 > 16) breaks = 'unknown-message';
        s.e = Array(n + 1).fill(0.1);
        s.P = identity(n + 1);
        break;
      case 'P-not-positive-definite':
        s.e = Array(Math.max(1, n)).fill(0.1);
        s.P = identity(Math.max(1, n)).map((row) => row.map(() => 0));
        if (n === 0) breaks = 'unknown-sample';
        break;
      case 'raw-nan':
        (s.nu as unknown[])[0] = new Raw('NaN');
        breaks = 'message';
        break;
      case 'raw-infinity':
        (s.nu as unknown[])[0] = new Raw(mu.pick % 2 ? 'Infinity' : '-Infinity');
        breaks = 'message';
        break;
      case 'raw-overflow':
        // valid JSON; JSON.parse makes it Infinity
        (s.nu as unknown[])[0] = new Raw(mu.pick % 2 ? '1e999' : '-1e999');
        break;
      case 'huge-nu':
        // ν'S⁻¹ν overflows a double
        (s.nu as unknown[])[0] = mu.pick % 2 ? 1e300 : -1e300;
        delete s.L;
        s.S = identity(m);
        break;
      case 'nis-beyond-float32':
        // a finite NIS, far beyond float32 (what the database keeps): valid, must be stored
        s.nu = Array(m).fill(1e20);
        delete s.L;
        s.S = identity(m).map((row) => row.map((v) => v * 1e-20));
        breaks = 'nothing';
        break;
      case 'nis-below-float32':
        // a positive NIS too small for float32: valid, must be stored
        s.nu = Array(m).fill(1e-25);
        delete s.L;
        s.S = identity(m);
        breaks = 'nothing';
        break;
      case 'tiny-nu':
        s.nu = (s.nu as number[]).map((v, k) => (k === 0 ? 5e-324 : v));
        breaks = 'nothing';
        break;
      case 'huge-S':
        delete s.L;
        s.S = identity(m).map((row) => row.map((v) => v * 1e300));
        breaks = 'nothing';
        break;
      case 'seq-negative':
        s.seq = -1 - (mu.pick % 1000);
        breaks = 'message';
        break;
      case 'seq-too-big':
        s.seq = 2_147_483_648 + (mu.pick % 1000);
        breaks = 'message';
        break;
      case 'seq-fraction':
        s.seq = 10.5 + (mu.pick % 1000);
        breaks = 'message';
        break;
      case 'seq-huge':
        s.seq = new Raw('1e400');
        breaks = 'message';
        break;
      case 'seq-missing':
        delete s.seq;
        breaks = 'message';
        break;
      case 't-missing':
        delete s.t;
        breaks = 'message';
        break;
      case 'nu-missing':
        delete s.nu;
        breaks = 'message';
        break;
      case 'extra-field':
        // an own "__proto__" (as JSON.parse makes one), not a prototype
        Object.defineProperty(s, mu.pick % 3 === 0 ? '__proto__' : mu.pick % 3 === 1 ? 'constructor' : 'extra', {
          value: { a: 1 },
          enumerable: true,
          writable: true,
          configurable: true,
        });
        breaks = 'message';
        break;
      case 'rev-valid':
        top.rev = 1 + (mu.pick % 5);
        breaks = 'nothing';
        break;
      case 'rev-zero':
        top.rev = 0;
        breaks = 'message';
        break;
      case 'v-2':
        top.v = 2;
        breaks = 'message';
        break;
      case 'v-string':
        top.v = '1';
        breaks = 'message';
        break;
      case 'v-missing':
        delete top.v;
        breaks = 'message';
        break;
      case 'nan-string-nu':
        (s.nu as unknown[])[0] = mu.value;
        breaks = 'message';
        break;
      case 'nan-string-S': {
        const M = (s[covKey] as unknown[][]).map((row) => [...row]);
        M[0][0] = mu.value;
        s[covKey] = M;
        breaks = 'message';
        break;
      }
      case 'nan-string-t':
        s.t = mu.value;
        breaks = 'message';
        break;
      case 'nan-string-seq':
        s.seq = mu.value;
        breaks = 'message';
        break;
      case 'wrong-type': {
        const field = ['seq', 't', 'nu', covKey, 'e', 'P'][mu.pick % 6];
        s[field] = mu.value;
        breaks = 'unknown-message';
        break;
      }
      case 'deep-field': {
        const field = ['seq', 't', 'nu', covKey, 'e', 'P', 'extra'][mu.pick % 7];
        s[field] = mu.value;
        breaks = 'message';
        break;
      }
      case 'time-invalid':
        s.t = new BadTime(mu.value as BadTimeKind);
        // in a window of time the lenient Date.parse takes, so only the format refuses them
        breaks = 'message';
        break;
      case 'time-far':
        s.t = new FarTime(mu.value as number);
        breaks = (mu.value as number) < 0 ? 'message' : 'sample';
        break;
      case 'time-number': {
        const v = mu.value as number;
        s.t = new NumberTime(v);
        breaks = !Number.isFinite(v) || v < 0 ? 'message' : 'unknown-sample';
        break;
      }
      default:
        throw new Error(`unknown mutation ${mu.name}`);
    }
    if (breaks === 'message') messageIntent = worst(messageIntent, 'invalid');
    else if (breaks === 'unknown-message') messageIntent = worst(messageIntent, 'unknown');
    else if (breaks === 'unknown-sample') sampleIntents[i] = worst(sampleIntents[i], 'unknown');
    else if (breaks === 'sample') sampleIntents[i] = 'invalid';
  }
  if (messageIntent === 'invalid') for (let i = 0; i < sampleIntents.length; i++) sampleIntents[i] = 'invalid';
  if (text) {
    names.push(`text:${text}`);
    if (text === 'bom' || text === 'trailing-garbage' || text === 'invalid-utf8-in-extra') {
      messageIntent = 'invalid';
      for (let i = 0; i < sampleIntents.length; i++) sampleIntents[i] = 'invalid';
    }
  }
  return { kind: batch ? 'batch' : 'single', target, doc: top, text, messageIntent, sampleIntents, mutations: names };
}

const TOP_LEVEL = new Set(['rev-valid', 'rev-zero', 'v-2', 'v-string', 'v-missing']);

function identity(k: number): number[][] {
  return Array.from({ length: k }, (_, r) => Array.from({ length: k }, (__, c) => (r === c ? 1 : 0)));
}

type BadTimeKind = 'no-offset' | 'date-only' | 'utc-string' | 'date-string' | 'day-overflow' | 'hour-24' | 'epoch-string' | 'offset-25h' | 'second-61';
class BadTime {
  constructor(readonly kind: BadTimeKind) {}
}
/** A numeric time outside the accepted window: -1 before the epoch, 1 … 4 far ahead or far behind. */
class FarTime {
  constructor(readonly which: number) {}
}
class NumberTime {
  constructor(readonly value: number) {}
}

/** A string that the lenient Date.parse reads as a time within the last days, but is not RFC 3339. */
function renderBadTime(kind: BadTimeKind, now: number): string {
  const t = now - 2 * 3_600_000;
  const iso = new Date(t).toISOString();
  switch (kind) {
    case 'no-offset':
      return iso.slice(0, 19);
    case 'date-only':
      return iso.slice(0, 10);
    case 'utc-string':
      return new Date(t).toUTCString();
    case 'date-string':
      return new Date(t).toString();
    case 'day-overflow': {
      // the day after the last of the previous month, as "day 31 of a 30-day month" (or 29/30/32 …)
      const d = new Date(t);
      const prev = new Date(Date.UTC(d.getUTCFullYear(), d.getUTCMonth(), 0));
      return `${pad(prev.getUTCFullYear(), 4)}-${pad(prev.getUTCMonth() + 1)}-${pad(prev.getUTCDate() + 1)}T10:00:00Z`;
    }
    case 'hour-24':
      return `${new Date(t - DAY).toISOString().slice(0, 10)}T24:00:00Z`;
    case 'epoch-string':
      return String(t);
    case 'offset-25h':
      return `${iso.slice(0, 19)}+25:00`;
    case 'second-61':
      return `${iso.slice(0, 17)}61Z`;
  }
}

function renderTime(v: ValidTime, now: number): number | string {
  const ms = now - v.agoMs;
  const r = v.render;
  switch (r.kind) {
    case 'number':
      return ms;
    case 'iso':
      return new Date(ms).toISOString();
    case 'offset':
      return renderWithOffset(ms, r.offsetMin);
    case 'lower':
      return new Date(ms).toISOString().replace('T', 't').replace('Z', 'z');
    case 'space':
      return renderWithOffset(ms, r.offsetMin, ' ');
    case 'fraction':
      return renderWithOffset(ms, 0, 'T', r.digits);
  }
}

// ------------------------------------------------------------------ materialize and model

export interface Outcome {
  /** Per sample (structured cases) or one for the message: 'stored', a reason code, or 'duplicate'. */
  samples: string[];
  /** Quarantine rows this message makes (reason codes). */
  quarantine: string[];
  stored: { seq: number; tMs: number; nu: number[] }[];
}

export interface Materialized {
  fuzzCase: FuzzCase;
  topic: string;
  payload: Buffer;
  outcome: Outcome;
  /** Where the model and the generator's intent disagree (empty when they agree). */
  intentProblems: string[];
}

export class PayloadModel {
  private readonly validate: ValidateFunction;
  private readonly monitors = new Map<string, EstimatorMonitor>();
  private readonly nextSeq = new Map<string, number>();

  constructor() {
    // The shared schema as written: "format": "date-time" means RFC 3339.
    const ajv = new Ajv2020({ allErrors: false, strict: true, strictRequired: false, strictNumbers: false, validateFormats: true });
    ajv.addFormat('date-time', { type: 'string', validate: (s: string) => !Number.isNaN(rfc3339Ms(s)) });
    this.validate = ajv.compile(payloadSchema);
  }

  private key(t: Target): string {
    return `${t.unit}/${t.estimator}`;
  }

  /** The estimator's checks as the service holds them (fixed m; the warm-up fixes n). */
  monitorOf(t: Target): EstimatorMonitor {
    let mon = this.monitors.get(this.key(t));
    if (!mon) this.monitors.set(this.key(t), (mon = new EstimatorMonitor({ m: t.m })));
    return mon;
  }

  /** The next free sequence number of an estimator (sequence numbers are never reused). */
  allocate(t: Target): number {
    const k = this.key(t);
    const s = this.nextSeq.get(k) ?? 1;
    this.nextSeq.set(k, s + 1);
    return s;
  }

  /** The bytes of a case, with fresh sequence numbers and times against `now`, and what must become of them. */
  materialize(c: FuzzCase, now: number): Materialized {
    const payload = this.serialize(c, now);
    const topic = innovationsTopic(c.target.unit, c.target.estimator);
    const outcome = this.expect(c.target, payload, now);
    return { fuzzCase: c, topic, payload, outcome, intentProblems: this.checkIntent(c, outcome) };
  }

  private serialize(c: FuzzCase, now: number): Buffer {
    if (c.bytes) return Buffer.from(c.bytes);
    if (c.kind === 'deep') {
      const depth = Math.abs(c.size ?? 1);
      return Buffer.from((c.size ?? 1) > 0 ? '['.repeat(depth) + ']'.repeat(depth) : '{"a":'.repeat(depth) + '1' + '}'.repeat(depth));
    }
    if (c.kind === 'huge') {
      const head = `{"v":1,"seq":${this.allocate(c.target)},"t":${now - 60_000},"nu":[${Array(c.target.m).fill(0.1).join(',')}],"S":${JSON.stringify(identity(c.target.m))},"pad":"`;
      const fill = Math.max(0, (c.size ?? MAX_PAYLOAD_BYTES + 1) - head.length - 2);
      return Buffer.from(`${head}${'x'.repeat(fill)}"}`);
    }
    const raws: string[] = [];
    const target = c.target;
    let text = JSON.stringify(c.doc, (_key, value: unknown) => {
      if (value instanceof SeqSlot) return this.allocate(target);
      if (value instanceof TimeSlot) return renderTime(value.t, now);
      if (value instanceof BadTime) return renderBadTime(value.kind, now);
      if (value instanceof FarTime) {
        const far = [-1, now + 2 * DAY, now + 400 * DAY, now - 20 * DAY, 1000][value.which === -1 ? 0 : value.which];
        return far;
      }
      if (value instanceof NumberTime) return this.unambiguousTime(value.value, now);
      if (value instanceof Raw) {
        raws.push(value.text);
        return `@@RAW${raws.length - 1}@@`;
      }
      if (value && typeof value === 'object' && 'deep' in value && Object.keys(value).length === 1 && typeof (value as { deep: unknown }).deep === 'number') {
        raws.push('['.repeat((value as { deep: number }).deep) + ']'.repeat((value as { deep: number }).deep));
        return `@@RAW${raws.length - 1}@@`;
      }
      return value;
    });
    if (text === undefined) text = 'null';
    text = text.replace(/"@@RAW(\d+)@@"/g, (_m, i: string) => raws[Number(i)]);
    switch (c.text) {
      case 'indent':
        text = reindent(text);
        break;
      case 'duplicate-key':
        // last one wins in JSON.parse: a bogus first "v" is overridden by the real one
        text = text.replace(/^\{/, '{"v":"bogus",');
        break;
      case 'bom':
        text = `\uFEFF${text}`;
        break;
      case 'trailing-garbage':
        text = `${text}}`;
        break;
      case 'trailing-space':
        text = `${text} \n\t`;
        break;
      case 'invalid-utf8-in-extra':
        // an extra member whose string holds bytes that are not UTF-8 (decoded as U+FFFD)
        return Buffer.concat([Buffer.from('{"x":"'), Buffer.from([0xff, 0xfe, 0x80]), Buffer.from('",'), Buffer.from(text.slice(1))]);
      default:
        break;
    }
    return Buffer.from(text);
  }

  /** A numeric time, moved out of the few minutes around the window's edges where the verdict would depend on when the service looks. */
  private unambiguousTime(v: number, now: number): number {
    const edges = [now + MAX_FUTURE_MS, now - MAX_AGE_MS];
    for (const e of edges) if (Math.abs(v - e) < 10 * 60_000) return e + (v >= e ? 20 * 60_000 : -20 * 60_000);
    return v;
  }

  /** What the service must do with `payload` on `target`'s topic (see the file's header). */
  expect(target: Target, payload: Buffer, now: number): Outcome {
    const whole = (reason: string): Outcome => ({ samples: [reason], quarantine: [reason], stored: [] });
    if (payload.length > MAX_PAYLOAD_BYTES) return whole('too_large');
    if (!target.registered) return whole('unknown_estimator');
    let body: unknown;
    try {
      body = JSON.parse(payload.toString('utf8'));
    } catch {
      return whole('not_json');
    }
    if (!this.validate(body)) return whole('schema');
    const obj = body as { samples?: Record<string, unknown>[] } & Record<string, unknown>;
    const raws = obj.samples ?? [obj];
    const monitor = this.monitorOf(target);
    const out: Outcome = { samples: [], quarantine: [], stored: [] };
    for (const raw of raws) {
      const t = raw.t as number | string;
      const tMs = typeof t === 'number' ? t : rfc3339Ms(t);
      let result: string;
      if (!Number.isFinite(tMs)) result = 'bad_time';
      else {
        const edgeMs = Math.min(Math.abs(tMs - (now + MAX_FUTURE_MS)), Math.abs(tMs - (now - MAX_AGE_MS)));
        if (edgeMs < 60_000) throw new Error(`the model cannot tell whether t = ${tMs} is inside the clock window (the generator must avoid its edges)`);
        if (tMs > now + MAX_FUTURE_MS || tMs < now - MAX_AGE_MS) result = 'clock';
        else {
          const r = ingestInnovationSample(monitor, { seq: raw.seq, t: tMs, nu: raw.nu, S: raw.S, L: raw.L, e: raw.e, P: raw.P });
          if (!r.ok) result = r.error.code;
          else if (r.outcome === 'duplicate') result = 'duplicate';
          else {
            result = 'stored';
            out.stored.push({ seq: raw.seq as number, tMs, nu: raw.nu as number[] });
          }
        }
      }
      out.samples.push(result);
      if (result !== 'stored' && result !== 'duplicate') out.quarantine.push(result);
    }
    return out;
  }

  private checkIntent(c: FuzzCase, o: Outcome): string[] {
    const problems: string[] = [];
    const storedAny = o.stored.length > 0;
    if (o.samples.includes('duplicate')) problems.push('a sample came out a duplicate: sequence numbers must never repeat in this fuzz');
    if (c.kind === 'single' || c.kind === 'batch') {
      if (c.messageIntent === 'invalid' && storedAny) problems.push(`meant invalid as a whole, but ${o.stored.length} sample(s) would be stored`);
      if (c.messageIntent === 'valid') {
        if (o.samples.length !== c.sampleIntents.length) problems.push(`meant to pass the schema with ${c.sampleIntents.length} sample(s), but the message came out ${JSON.stringify(o.samples)}`);
        else
          c.sampleIntents.forEach((intent, i) => {
            if (intent === 'valid' && o.samples[i] !== 'stored') problems.push(`sample ${i} meant valid came out ${o.samples[i]}`);
            if (intent === 'invalid' && o.samples[i] === 'stored') problems.push(`sample ${i} meant invalid would be stored`);
          });
      }
    } else if (c.messageIntent === 'invalid' && storedAny) {
      problems.push(`a ${c.kind} case would store ${o.stored.length} sample(s)`);
    }
    return problems;
  }
}

function reindent(text: string): string {
  // whitespace between tokens only: insert a newline and two spaces after every ',' and '{' outside strings
  let out = '';
  let inString = false;
  for (let i = 0; i < text.length; i++) {
    const ch = text[i];
    out += ch;
    if (ch === '"' && text[i - 1] !== '\\') inString = !inString;
    if (!inString && (ch === ',' || ch === '{' || ch === '[')) out += '\n  ';
  }
  return out;
}

/** Float32 as PostgreSQL keeps `real` values and the service keeps ν: saturated at ±FLT_MAX. */
export function asStoredFloat32(x: number): number {
  const F32_MAX = 3.4028234663852886e38;
  return x > F32_MAX ? F32_MAX : x < -F32_MAX ? -F32_MAX : Math.fround(x);
}
