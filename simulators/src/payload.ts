// The wire form of innovation samples (shared/src/payload/innovation-payload.schema.json):
//   single  {v: 1, rev?, seq, t, nu, S, e?, P?}
//   batch   {v: 1, rev?, samples: [{seq, t, nu, S, e?, P?}, …]}   at most 1000 samples

/** One innovation sample as the simulator produces it. */
export interface SimulatedSample {
  /** Sequence number, one more per sample of the estimator. */
  seq: number;
  /** Sample time, Unix epoch milliseconds. */
  t: number;
  /** Innovation ν = z − C·x̂⁻ (m). */
  nu: number[];
  /** Innovation covariance S = C·P⁻·Cᵀ + R (m×m). */
  S: number[][];
  /** Reference error e = x − x̂ after the update (n), when the simulator publishes the truth. */
  e?: number[];
  /** The filter's covariance P of e after the update (n×n). */
  P?: number[][];
}

export type TimeFormat = 'epoch-ms' | 'rfc3339';

export const MAX_BATCH_SIZE = 1000;

export interface PayloadOptions {
  /** Design revision the estimator runs. */
  rev?: number;
  /** How t is written (default epoch-ms). */
  time?: TimeFormat;
}

function sampleFields(s: SimulatedSample, time: TimeFormat): Record<string, unknown> {
  const out: Record<string, unknown> = {
    seq: s.seq,
    t: time === 'rfc3339' ? new Date(s.t).toISOString() : s.t,
    nu: s.nu,
    S: s.S,
  };
  if (s.e && s.P) {
    out['e'] = s.e;
    out['P'] = s.P;
  }
  return out;
}

/** The single form of one sample. */
export function singlePayloadObject(s: SimulatedSample, options: PayloadOptions = {}): Record<string, unknown> {
  const head: Record<string, unknown> = { v: 1 };
  if (options.rev !== undefined) head['rev'] = options.rev;
  return Object.assign(head, sampleFields(s, options.time ?? 'epoch-ms'));
}

export function singlePayload(s: SimulatedSample, options: PayloadOptions = {}): string {
  return JSON.stringify(singlePayloadObject(s, options));
}

/** The batch form of 1 … 1000 samples of one estimator. */
export function batchPayload(samples: readonly SimulatedSample[], options: PayloadOptions = {}): string {
  if (samples.length < 1 || samples.length > MAX_BATCH_SIZE) {
    throw new RangeError(`a batch carries 1 to ${MAX_BATCH_SIZE} samples, got ${samples.length}`);
  }
  const time = options.time ?? 'epoch-ms';
  const head: Record<string, unknown> = { v: 1 };
  if (options.rev !== undefined) head['rev'] = options.rev;
  head['samples'] = samples.map((s) => sampleFields(s, time));
  return JSON.stringify(head);
}
