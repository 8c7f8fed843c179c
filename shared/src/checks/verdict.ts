/**
 * Verdict words and how checks combine them. A check says 'consistent' when it
 * has no evidence against the filter, 'marginal' when its statistic is outside
 * the bounds at the marginal significance but not at the strict one, and
 * 'inconsistent' when it is outside the strict bounds (or a drift detector has
 * signalled recently). 'silent' (no data) is decided by the service from time.
 */

export type Verdict = 'consistent' | 'marginal' | 'inconsistent';
export type EstimatorVerdict = Verdict | 'silent';

/** 0 consistent, 1 marginal, 2 inconsistent. */
export type Severity = 0 | 1 | 2;

const VERDICTS: readonly Verdict[] = ['consistent', 'marginal', 'inconsistent'];

export function verdictOf(severity: Severity): Verdict {
  return VERDICTS[severity];
}

export function severityOf(verdict: Verdict): Severity {
  return verdict === 'inconsistent' ? 2 : verdict === 'marginal' ? 1 : 0;
}

/** The worse of two verdicts. */
export function worseVerdict(a: Verdict, b: Verdict): Verdict {
  return severityOf(a) >= severityOf(b) ? a : b;
}

/** Shared significance settings of the hypothesis-test checks. */
export interface Significance {
  /** Strict level: rejection here makes the check 'inconsistent'. */
  alpha: number;
  /** Marginal level (≥ alpha): rejection here only makes it 'marginal'. */
  alphaMarginal: number;
}

export function assertSignificance({ alpha, alphaMarginal }: Significance): void {
  if (!(alpha > 0 && alpha < 1)) throw new RangeError(`alpha must be in (0, 1), got ${alpha}`);
  if (!(alphaMarginal >= alpha && alphaMarginal < 1)) {
    throw new RangeError(`alphaMarginal must be in [alpha, 1), got ${alphaMarginal} with alpha ${alpha}`);
  }
}

export function assertWindowLength(windowLength: number, minimum = 2): void {
  if (!Number.isInteger(windowLength) || windowLength < minimum) {
    throw new RangeError(`window length must be an integer ≥ ${minimum}, got ${windowLength}`);
  }
}

/** Restoring a checkpoint that does not fit the check it is given to. */
export class CheckpointError extends Error {
  override readonly name = 'CheckpointError';
}

export function expectKind(state: unknown, kind: string, version: number): Record<string, unknown> {
  if (typeof state !== 'object' || state === null) throw new CheckpointError(`${kind}: checkpoint is not an object`);
  const record = state as Record<string, unknown>;
  if (record['kind'] !== kind) throw new CheckpointError(`expected a '${kind}' checkpoint, got '${String(record['kind'])}'`);
  if (record['version'] !== version) {
    throw new CheckpointError(`${kind}: checkpoint version ${String(record['version'])} is not the supported ${version}`);
  }
  return record;
}

/**
 * Float64 values packed for a checkpoint: little-endian IEEE 754 doubles in base64
 * (about 10.7 characters a value against 18–24 as JSON decimals, and exact).
 */
export function packFloat64(values: ArrayLike<number>): string {
  const view = new DataView(new ArrayBuffer(values.length * 8));
  for (let i = 0; i < values.length; i++) view.setFloat64(i * 8, values[i], true);
  const bytes = new Uint8Array(view.buffer);
  // Node's btoa is slow (profiled: the largest single stall in the ingest service's
  // checkpoints); its Buffer gives the same base64 natively. Browsers use btoa.
  if (nodeBuffer) return nodeBuffer.from(bytes.buffer, bytes.byteOffset, bytes.byteLength).toString('base64');
  let binary = '';
  for (let i = 0; i < bytes.length; i += 0x8000) binary += String.fromCharCode(...bytes.subarray(i, i + 0x8000));
  return btoa(binary);
}

/** Node's Buffer where there is one (the service); undefined in a browser. */
const nodeBuffer = (
  globalThis as {
    Buffer?: {
      from(buffer: ArrayBufferLike, byteOffset?: number, length?: number): { toString(encoding: 'base64'): string };
      from(text: string, encoding: 'base64'): Uint8Array;
    };
  }
).Buffer;

const BASE64 = /^(?:[A-Za-z0-9+/]{4})*(?:[A-Za-z0-9+/]{2}==|[A-Za-z0-9+/]{3}=)?$/;

function unpackFloat64(packed: string, what: string): number[] {
  if (nodeBuffer) {
    // Buffer's decoder skips characters that are not base64 where atob refuses them: check first.
    if (!BASE64.test(packed)) throw new CheckpointError(`${what}: not base64`);
    const bytes = nodeBuffer.from(packed, 'base64');
    if (bytes.length % 8 !== 0) throw new CheckpointError(`${what}: packed length ${bytes.length} is not a multiple of 8 bytes`);
    const view = new DataView(bytes.buffer, bytes.byteOffset, bytes.byteLength);
    const out = new Array<number>(bytes.length / 8);
    for (let i = 0; i < out.length; i++) out[i] = view.getFloat64(i * 8, true);
    return out;
  }
  let binary: string;
  try {
    binary = atob(packed);
  } catch {
    throw new CheckpointError(`${what}: not base64`);
  }
  if (binary.length % 8 !== 0) throw new CheckpointError(`${what}: packed length ${binary.length} is not a multiple of 8 bytes`);
  const view = new DataView(new ArrayBuffer(binary.length));
  for (let i = 0; i < binary.length; i++) view.setUint8(i, binary.charCodeAt(i));
  const out = new Array<number>(binary.length / 8);
  for (let i = 0; i < out.length; i++) out[i] = view.getFloat64(i * 8, true);
  return out;
}

/** A checkpoint's number list: a JSON array, or values packed by {@link packFloat64}. */
export function expectNumberArray(value: unknown, length: number, what: string): number[] {
  if (typeof value === 'string') value = unpackFloat64(value, what);
  if (!Array.isArray(value) || value.length !== length || !value.every((v) => typeof v === 'number' && Number.isFinite(v))) {
    throw new CheckpointError(`${what}: expected ${length} finite numbers`);
  }
  return value as number[];
}

export function expectInteger(value: unknown, min: number, max: number, what: string): number {
  if (typeof value !== 'number' || !Number.isInteger(value) || value < min || value > max) {
    throw new CheckpointError(`${what}: expected an integer in [${min}, ${max}], got ${String(value)}`);
  }
  return value;
}
