// The benchmark's fleet: synthetic tractors (the simulator's syntheticTractors) with a
// secret per unit derived from a random key made for this run, and the messages the
// benchmark and its publisher processes exchange.
import { createHmac } from 'node:crypto';
import type { HistogramData } from './latency-histogram';

/** Each unit's MQTT secret: HMAC-SHA256(run key, unit key), so publishers need only the run key. */
export function benchSecretFor(runKey: string): (unitKey: string) => string {
  return (unitKey) => createHmac('sha256', runKey).update(unitKey).digest('base64url');
}

export interface WorkerConfig {
  /** mqtt://127.0.0.1:port */
  url: string;
  runKey: string;
  /** Total units of the fleet and the slice [from, to) this worker runs (0-based). */
  totalUnits: number;
  from: number;
  to: number;
  /** Samples per second per estimator. */
  rate: number;
  /** Seconds over which the rate climbs linearly from a tenth of `rate` to `rate` (0: full rate at once). */
  rampS: number;
  /** Samples per message (1 = the single form). */
  batch: number;
  /** Publish e and P with each sample (the NEES check). */
  reference: boolean;
  /** Units (0-based fleet indexes) whose measurement noise grows ×faultFactor from faultAtMs. */
  faultUnits: number[];
  faultFactor: number;
  seed: number;
  /** A unit stops generating while more than this many of its messages await PUBACK. */
  maxInFlightPerUnit: number;
  /** Units connecting at once. */
  connectConcurrency: number;
  /** Partitions of the fleet: publish under whitecap/v1/partitions/{p}/… (unset: the unpartitioned topics). */
  partitions?: number;
}

/**
 * The schedule of one estimator: N(s) samples due s seconds after the start, and its
 * inverse (when sample n is due). Linear ramp from r0 = rate/10 to rate over rampS.
 */
export function schedule(rate: number, rampS: number): { due(s: number): number; timeOf(n: number): number } {
  if (rampS <= 0) return { due: (s) => s * rate, timeOf: (n) => n / rate };
  const r0 = rate / 10;
  const a = (rate - r0) / rampS; // the rate's slope
  const atRampEnd = r0 * rampS + (a * rampS * rampS) / 2;
  return {
    due: (s) => (s < rampS ? r0 * s + (a * s * s) / 2 : atRampEnd + rate * (s - rampS)),
    timeOf: (n) => (n < atRampEnd ? (-r0 + Math.sqrt(r0 * r0 + 2 * a * n)) / a : rampS + (n - atRampEnd) / rate),
  };
}

export type ToWorker =
  | { type: 'config'; config: WorkerConfig }
  | { type: 'go'; startAtMs: number; faultAtMs: number; steadyAtMs: number }
  | { type: 'stop'; drainMs: number };

export interface WorkerCounts {
  publishedMessages: number;
  ackedMessages: number;
  publishedSamples: number;
  ackedSamples: number;
  inFlightMessages: number;
  /** Samples the worker could not generate on time (a unit's window full, or the worker late) and skipped. */
  skippedSamples: number;
  /** Ticks that found a unit's in-flight window full. */
  windowFullTicks: number;
  disconnects: number;
  errors: number;
}

/** A unit's acknowledged sample numbers, as inclusive ranges. */
export interface AckedRanges {
  unitKey: string;
  ranges: [number, number][];
}

export type FromWorker =
  | { type: 'connected'; units: number; ms: number }
  | {
      type: 'progress';
      atMs: number;
      counts: WorkerCounts;
      loopDelayP99Ms: number;
      cpuSeconds: number;
      systemCpuSeconds: number;
      /** PUBACK latency of the messages acknowledged since the last report. */
      recentP99Ms: number | null;
      recentMaxMs: number | null;
    }
  | { type: 'fault'; unitIndex: number; unitKey: string; seq: number; tMs: number }
  | {
      type: 'done';
      counts: WorkerCounts;
      drained: boolean;
      publishToAck: HistogramData;
      /** The same, for messages published after the warm-up (the sustained-rate window). */
      steadyPublishToAck: HistogramData;
      sampleToAck: HistogramData;
      loopDelay: { p50Ms: number; p99Ms: number; maxMs: number };
      acked: AckedRanges[];
      /** Client errors by message. */
      errorKinds: Record<string, number>;
    }
  | { type: 'error'; message: string };
