// The ingest pipeline: one MQTT message in → parsed, validated, checked per estimator,
// queued for storage; the returned promise settles when everything the message
// produced is committed (the broker acknowledges the message then). A bad message or
// sample goes to quarantine with its reason; it never throws out of here and never
// holds back the good samples of the same batch.
import { Ajv2020 } from 'ajv/dist/2020';
import type { ValidateFunction } from 'ajv';
import {
  EstimatorMonitor,
  ingestInnovationSample,
  type EstimatorReport,
  type Verdict,
} from '../../../shared/src/index';
import payloadSchema from '../../../shared/src/payload/innovation-payload.schema.json';
import type { Clock } from '../clock';
import type { ServiceEvents } from '../events';
import type { Logger } from '../logger';
import type { Metrics } from '../metrics';
import { TokenBuckets } from '../broker/unit-rate-limit';
import { parsePartitionedInnovationsTopic } from '../broker/topics';
import { IntakeLag } from './intake-lag';
import { AlertRuleState, ESTIMATOR_RULES, RULE_SEVERITY, conditionsFromReport, lostSamplesCondition, type RuleName } from './alert-rules';
import type { AlertOp, BatchWriter, QuarantineRow, SampleRow, StatusRow, VerdictWord } from './batch-writer';
import type { EstimatorInfo, EstimatorRegistry } from './estimator-registry';

export interface PipelineSettings {
  /** Largest payload taken as is; larger ones are quarantined (default 256 KiB). */
  maxPayloadBytes: number;
  /** Bytes of a quarantined payload kept (default 4 KiB). */
  quarantinePayloadBytes: number;
  /** Samples stamped further ahead of the service's clock are quarantined (default 5 min). */
  maxFutureMs: number;
  /** Samples older than this are quarantined (default 14 days, the raw retention). */
  maxAgeMs: number;
  /** How often an estimator's status and rules are refreshed while nothing changes (default 5 s). */
  statusEveryMs: number;
  /** How long a condition must stay gone before its alert clears by itself (default 60 s). */
  alertHoldMs: number;
  /** An estimator is silent after expected interval × this factor without a sample (default 10). */
  silenceFactor: number;
  /** Never silent before this long without a sample, however fast the estimator runs (default 10 s). */
  silenceFloorMs: number;
  /** Silence is not judged while more samples than this wait for the database (default 5000). */
  silenceJudgedBelowQueue: number;
  /** Quarantined payloads per unit in 5 minutes that raise the quarantine-rate alert (default 20). */
  quarantineAlertCount: number;
  /** The rules look at an estimator at least every this many samples (default 10), besides every statusEveryMs. */
  rulesEverySamples: number;
  /** An alert on a window test needs a p-value below this (default 1e-6; see alert-rules.ts). */
  alertPValue: number;
  /** Samples a unit may send per second on average, and at once after a quiet spell; beyond, its messages are quarantined (rate_limit). */
  unitSamplesPerSecond: number;
  unitBurstSamples: number;
  /** Settings of the checks (window length, significance…); defaults from the shared library. */
  monitor: ConstructorParameters<typeof EstimatorMonitor>[0];
}

export const DEFAULT_PIPELINE_SETTINGS: PipelineSettings = {
  maxPayloadBytes: 256 * 1024,
  quarantinePayloadBytes: 4096,
  maxFutureMs: 5 * 60_000,
  maxAgeMs: 14 * 86_400_000,
  statusEveryMs: 5000,
  alertHoldMs: 60_000,
  silenceFactor: 10,
  quarantineAlertCount: 20,
  silenceFloorMs: 10_000,
  silenceJudgedBelowQueue: 5000,
  alertPValue: 1e-6,
  rulesEverySamples: 10,
  unitSamplesPerSecond: 2000,
  unitBurstSamples: 60_000,
  // CUSUM designed for an in-control ARL of 10 million samples: at 1 sample/s, one false
  // signal per estimator in about 116 days.
  monitor: { arl0: 1e7 },
};

interface RawSample {
  seq: number;
  t: number | string;
  nu: number[];
  S?: number[][];
  L?: number[][];
  e?: number[];
  P?: number[][];
}

/** One estimator's checks and what the service knows of its stream. */
interface EstimatorStream {
  info: EstimatorInfo;
  monitor: EstimatorMonitor;
  verdict: VerdictWord;
  verdictSinceMs: number;
  lastSampleAtMs: number | null;
  lastReceivedAtMs: number | null;
  lastSeq: number | null;
  unsavedSamples: number;
  lastStatusAtMs: number;
  /** Samples checked since the rules last looked. */
  samplesSinceRefresh: number;
  lastEvidenceAtMs: number;
  checkpointDirty: boolean;
  rules: AlertRuleState;
  /** Sequence counters at the last refresh, and exponentially weighted recent counts (lost-samples rule). */
  seenLost: number;
  seenAccepted: number;
  recentLost: number;
  recentAccepted: number;
}

export interface QuarantineReason {
  code: string;
  message: string;
}

/** Samples the lost-samples rule remembers (exponential weighting). */
const LOSS_MEMORY = 200;

const VERDICT_RANK: Record<VerdictWord, number> = { consistent: 0, marginal: 1, inconsistent: 2, silent: 3 };

const FLOAT32_MAX = 3.4028234663852886e38;

/**
 * A value for a float32 (`real`) column: PostgreSQL refuses a number beyond float32's range
 * (or too small to be anything but zero) with an error that fails the whole batch, so a
 * valid sample with an extreme NIS would hold up every unit's writes. Saturated at ±FLT_MAX,
 * rounded to float32 below it (underflowing to zero).
 */
function float32(x: number): number {
  return x > FLOAT32_MAX ? FLOAT32_MAX : x < -FLOAT32_MAX ? -FLOAT32_MAX : Math.fround(x);
}

function toFloat32(values: ArrayLike<number>, m: number): Buffer {
  const b = Buffer.allocUnsafe(4 * m);
  for (let i = 0; i < m; i++) b.writeFloatLE(float32(values[i]), 4 * i);
  return b;
}

/**
 * A quarantine reason as PostgreSQL text takes it: the parser's and the schema's messages
 * quote the payload, and a NUL character in a text value fails the whole batch.
 */
function reasonText(message: string): string {
  const text = message.includes('\u0000') ? message.replace(/\u0000/g, '\\u0000') : message;
  return text.length > 1000 ? `${text.slice(0, 999)}…` : text;
}

// RFC 3339 §5.6 date-time, the payload schema's "date-time": full date, "T" (or "t", or a
// space, §5.6 note), full time, and a required offset. Date.parse takes far more: no offset
// (read as the server's local time), "Nov 31" (as Dec 1), "24:00", RFC 2822 dates …
const DATE_TIME = /^(\d{4})-(\d\d)-(\d\d)[Tt ](\d\d):(\d\d):(\d\d)(\.\d+)?([Zz]|[+-]\d\d:\d\d)$/;

/** Epoch milliseconds of an RFC 3339 date-time, or NaN. A leap second (:60) is the first instant of the next minute. */
export function rfc3339Ms(text: string): number {
  const m = DATE_TIME.exec(text);
  if (!m) return Number.NaN;
  const [y, mo, d, h, mi, s] = [m[1], m[2], m[3], m[4], m[5], m[6]].map(Number);
  const leap = y % 4 === 0 && (y % 100 !== 0 || y % 400 === 0);
  const days = mo === 2 ? (leap ? 29 : 28) : mo === 4 || mo === 6 || mo === 9 || mo === 11 ? 30 : 31;
  if (mo < 1 || mo > 12 || d < 1 || d > days || h > 23 || mi > 59 || s > 60) return Number.NaN;
  let offsetMs = 0;
  if (m[8].length > 1) {
    const oh = Number(m[8].slice(1, 3));
    const om = Number(m[8].slice(4, 6));
    if (oh > 23 || om > 59) return Number.NaN;
    offsetMs = (m[8][0] === '-' ? -1 : 1) * (oh * 60 + om) * 60_000;
  }
  const day = new Date(0);
  day.setUTCFullYear(y, mo - 1, d); // (Date.UTC would read years 0–99 as 1900–1999)
  return day.getTime() + ((h * 60 + mi) * 60 + s) * 1000 + (m[7] ? Number(`0${m[7]}`) * 1000 : 0) - offsetMs;
}

/** A sample time for a message: ISO 8601 when it is a date at all. */
function timeText(ms: number): string {
  return Math.abs(ms) <= 8.64e15 ? new Date(ms).toISOString() : `${ms} ms`;
}

export class IngestPipeline {
  private readonly streams = new Map<number, EstimatorStream>();
  /** When this service started listening: silence is not judged from before it. */
  private readonly startedAtMs: number;
  private readonly loading = new Map<number, Promise<EstimatorStream>>();
  private readonly validatePayload: ValidateFunction;
  private readonly unitQuarantine = new Map<string, { times: number[]; rules: AlertRuleState; unitId: number | null }>();
  private readonly settings: PipelineSettings;
  /** Per-unit token buckets on samples (keys are signed-in units, so the fleet bounds them). */
  private readonly unitSamples: TokenBuckets;

  constructor(
    private readonly deps: {
      registry: EstimatorRegistry;
      writer: BatchWriter;
      clock: Clock;
      logger: Logger;
      metrics: Metrics;
      events: ServiceEvents;
      loadCheckpoint: (estimatorId: number) => Promise<{ state: unknown; status: Partial<StatusRow> | null } | null>;
      /** Samples stored with a sequence number above `seq` (those committed after a checkpoint), in order. */
      storedAfter?: (estimatorId: number, seq: number) => Promise<{ seq: number; t: number }[]>;
      unitIdOf: (unitKey: string) => Promise<number | null>;
      /** A unit's provisioned partition (partitioned workers): a message on another partition's topic is quarantined. */
      partitionOf?: (unitKey: string) => Promise<number | null>;
    },
    settings: Partial<PipelineSettings> = {},
  ) {
    this.settings = { ...DEFAULT_PIPELINE_SETTINGS, ...settings };
    this.unitSamples = new TokenBuckets({ ratePerSecond: this.settings.unitSamplesPerSecond, burst: this.settings.unitBurstSamples, maxKeys: 100_000 });
    this.startedAtMs = deps.clock.now();
    const ajv = new Ajv2020({ allErrors: false, strict: true, strictRequired: false, strictNumbers: false, validateFormats: true });
    ajv.addFormat('date-time', { type: 'string', validate: (text: string) => !Number.isNaN(rfc3339Ms(text)) });
    this.validatePayload = ajv.compile(payloadSchema);
  }

  /** Estimators with checks in memory. */
  streamCount(): number {
    return this.streams.size;
  }

  /** The current report of an estimator whose checks are in memory. */
  report(estimatorId: number): EstimatorReport | null {
    return this.streams.get(estimatorId)?.monitor.report() ?? null;
  }

  async handle(unitKey: string, estimatorKey: string, topic: string, payload: Buffer): Promise<void> {
    const now = this.deps.clock.now();
    const m = this.deps.metrics;
    m.messagesIn.inc();
    const quarantineWhole = (reason: QuarantineReason, estimatorId: number | null = null) =>
      this.quarantine(unitKey, estimatorKey, estimatorId, topic, payload, [{ reason, index: null }], now);

    if (payload.length > this.settings.maxPayloadBytes) {
      return quarantineWhole({
        code: 'too_large',
        message: `payload of ${payload.length} bytes exceeds the ${this.settings.maxPayloadBytes}-byte limit`,
      });
    }
    const info = await this.deps.registry.find(unitKey, estimatorKey, now);
    if (!info) {
      return quarantineWhole({
        code: 'unknown_estimator',
        message: `no estimator '${estimatorKey}' is registered on unit '${unitKey}'`,
      });
    }
    // Partitioned workers: only the worker holding the unit's partition may feed its checks.
    const onPartition = this.deps.partitionOf ? parsePartitionedInnovationsTopic(topic)?.partition : undefined;
    if (onPartition !== undefined) {
      const own = await this.deps.partitionOf!(unitKey);
      if (own !== onPartition) {
        return quarantineWhole(
          { code: 'wrong_partition', message: `unit '${unitKey}' belongs to partition ${own}, not to partition ${onPartition} it published on` },
          info.id,
        );
      }
    }
    let body: unknown;
    try {
      body = JSON.parse(payload.toString('utf8'));
    } catch (err) {
      return quarantineWhole({ code: 'not_json', message: `payload is not JSON: ${(err as Error).message}` }, info.id);
    }
    if (!this.validatePayload(body)) {
      const e = this.validatePayload.errors?.[0];
      const where = e?.instancePath ? ` at ${e.instancePath}` : '';
      return quarantineWhole(
        { code: 'schema', message: `payload does not follow schema v1${where}: ${e?.message ?? 'invalid'}` },
        info.id,
      );
    }
    const obj = body as { samples?: RawSample[] } & RawSample;
    const raws: RawSample[] = obj.samples ?? [obj];
    m.samplesIn.inc(raws.length);
    this.noteIntakeLag(raws, now);
    if (!this.unitSamples.take(unitKey, raws.length, now)) {
      m.rateLimited.inc(raws.length);
      return quarantineWhole(
        {
          code: 'rate_limit',
          message: `unit ${unitKey} sent more samples than its limit of ${this.settings.unitSamplesPerSecond}/s with bursts of ${this.settings.unitBurstSamples}: the ${raws.length} of this message were not taken`,
        },
        info.id,
      );
    }

    const stream = this.streams.get(info.id) ?? (await this.loadStream(info));
    const checksStarted = performance.now();
    // Everything from here to the write is synchronous: samples of one estimator are
    // checked in the order their messages arrived.
    const samples: SampleRow[] = [];
    const rejected: { reason: QuarantineReason; index: number | null }[] = [];
    const previousVerdict = stream.verdict;
    let duplicates = 0;
    for (let i = 0; i < raws.length; i++) {
      const raw = raws[i];
      const tMs = typeof raw.t === 'number' ? raw.t : rfc3339Ms(raw.t);
      if (!Number.isFinite(tMs)) {
        rejected.push({ reason: { code: 'bad_time', message: `sample time ${JSON.stringify(raw.t)} is not a date-time` }, index: i });
        continue;
      }
      if (tMs > now + this.settings.maxFutureMs || tMs < now - this.settings.maxAgeMs) {
        const ahead = tMs > now;
        rejected.push({
          reason: {
            code: 'clock',
            message: `sample time ${timeText(tMs)} is ${ahead ? 'ahead of' : 'behind'} the service clock by ${Math.round(Math.abs(tMs - now) / 1000)} s (accepted: ${this.settings.maxFutureMs / 1000} s ahead, ${this.settings.maxAgeMs / 86_400_000} days behind)`,
          },
          index: i,
        });
        continue;
      }
      const result = ingestInnovationSample(stream.monitor, { seq: raw.seq, t: tMs, nu: raw.nu, S: raw.S, L: raw.L, e: raw.e, P: raw.P });
      if (!result.ok) {
        rejected.push({ reason: { code: result.error.code, message: `${result.error.field}: ${result.error.message}` }, index: i });
        continue;
      }
      if (result.outcome === 'duplicate') {
        duplicates += 1;
        continue;
      }
      const cusum = stream.monitor.cusumStatistics();
      const exceeded = stream.monitor.lastExceeded;
      const verdict: VerdictWord = result.verdict;
      samples.push({
        estimatorId: info.id,
        tMs,
        seq: raw.seq,
        nis: float32(result.nis),
        cusumUp: float32(cusum.up),
        cusumDown: float32(cusum.down),
        nu: toFloat32(raw.nu, info.measurementDim),
        w: toFloat32(stream.monitor.lastWhitenedInnovation, info.measurementDim),
        exceeded,
        verdict,
      });
      stream.lastSampleAtMs = Math.max(stream.lastSampleAtMs ?? 0, tMs);
      stream.lastSeq = result.outcome === 'restart' ? raw.seq : Math.max(stream.lastSeq ?? 0, raw.seq);
    }
    stream.lastReceivedAtMs = now;
    stream.unsavedSamples += samples.length;
    stream.samplesSinceRefresh += samples.length;
    if (samples.length > 0) stream.checkpointDirty = true;
    if (duplicates > 0) m.duplicates.inc(duplicates);

    const newVerdict: VerdictWord = stream.monitor.verdict;
    const changed = newVerdict !== previousVerdict;
    if (changed) {
      stream.verdict = newVerdict;
      stream.verdictSinceMs = now;
    }
    let status: StatusRow[] = [];
    let alerts: AlertOp[] = [];
    const statusDue = changed || now - stream.lastStatusAtMs >= this.settings.statusEveryMs;
    if (statusDue || stream.samplesSinceRefresh >= this.settings.rulesEverySamples) {
      // The rules look every few samples; the status row (with its window summary, the
      // bulk of what a batch upserts) is stored when the verdict changes and otherwise
      // once per status period.
      ({ status, alerts } = this.refresh(stream, now, false, statusDue));
    }
    const quarantine = this.quarantineRows(unitKey, estimatorKey, info.id, topic, payload, rejected, now);
    m.checkSeconds.observe((performance.now() - checksStarted) / 1000);

    await this.deps.writer.write({ samples, quarantine, status, alerts }, unitKey);
    m.samplesStored.inc(samples.length);
    if (changed) {
      this.deps.events.emit('verdict', { estimatorId: info.id, unitId: info.unitId, verdict: newVerdict, previous: previousVerdict, atMs: now });
    }
    this.emitAlerts(alerts);
    if (quarantine.length > 0) await this.noteQuarantine(unitKey, quarantine.length, now);
  }

  /** A status row and the alert operations for an estimator, from its current report. */
  private refresh(stream: EstimatorStream, now: number, silent = false, withStatus = true): { status: StatusRow[]; alerts: AlertOp[] } {
    const report = stream.monitor.report();
    stream.samplesSinceRefresh = 0;
    const status: StatusRow | null = !withStatus ? null : {
      estimatorId: stream.info.id,
      verdict: stream.verdict,
      verdictSinceMs: stream.verdictSinceMs,
      lastSampleAtMs: stream.lastSampleAtMs,
      lastReceivedAtMs: stream.lastReceivedAtMs,
      lastSeq: stream.lastSeq,
      samplesAdded: stream.unsavedSamples,
      window: summarizeReport(report),
      pValue: report.checks && Number.isFinite(report.pValue) ? report.pValue : null,
      nisRatio: report.checks?.nis.ready && report.m ? float32(report.checks.nis.average / report.m) : null,
    };
    if (status) {
      stream.unsavedSamples = 0;
      stream.lastStatusAtMs = now;
    }
    const conditions = conditionsFromReport(report, {
      alertPValue: this.settings.alertPValue,
      neesAlerts: stream.monitor.config.neesInVerdict,
    });
    const seq = report.checks?.sequence;
    if (seq) {
      // Counts over roughly the last LOSS_MEMORY samples: each newer sample weighs the older ones down.
      const dLost = seq.lost - stream.seenLost;
      const dAccepted = seq.accepted - stream.seenAccepted;
      const decay = Math.pow(1 - 1 / LOSS_MEMORY, dAccepted + dLost);
      stream.recentLost = stream.recentLost * decay + dLost;
      stream.recentAccepted = stream.recentAccepted * decay + dAccepted;
      stream.seenLost = seq.lost;
      stream.seenAccepted = seq.accepted;
      const lost = lostSamplesCondition(Math.round(stream.recentLost), Math.round(stream.recentAccepted));
      if (lost) conditions.push(lost);
    }
    // Where the estimator's stream stood when the rule looked: lets a reader tie an alert to its samples.
    for (const c of conditions) c.evidence = { ...(c.evidence as object), atSeq: stream.lastSeq };
    if (silent) {
      conditions.push({
        rule: 'silence',
        severity: RULE_SEVERITY.silence,
        summary: `no sample for ${Math.round((now - (stream.lastReceivedAtMs ?? now)) / 1000)} s (expected one every ${stream.info.expectedIntervalMs / 1000} s)`,
        evidence: { lastReceivedAt: stream.lastReceivedAtMs === null ? null : new Date(stream.lastReceivedAtMs).toISOString(), expectedIntervalMs: stream.info.expectedIntervalMs, factor: this.settings.silenceFactor },
      });
    }
    const evaluated = new Set<RuleName>([...ESTIMATOR_RULES, 'silence']);
    let alerts = stream.rules.evaluate(conditions, evaluated, now);
    // Fresh evidence for a live alert is stored at most once per status period.
    if (now - stream.lastEvidenceAtMs >= this.settings.statusEveryMs) stream.lastEvidenceAtMs = now;
    else alerts = alerts.filter((op) => op.kind !== 'evidence');
    return { status: status ? [status] : [], alerts };
  }

  private emitAlerts(alerts: AlertOp[]): void {
    for (const op of alerts) {
      if (op.kind === 'evidence') continue;
      if (op.kind === 'open') this.deps.metrics.alertsOpened.inc({ rule: op.rule });
      this.deps.events.emit('alert', {
        kind: op.kind,
        estimatorId: op.estimatorId,
        unitId: op.unitId,
        rule: op.rule,
        severity: op.kind === 'open' ? op.severity : undefined,
        summary: op.kind === 'open' ? op.summary : undefined,
        atMs: op.atMs,
      });
    }
  }

  private async loadStream(info: EstimatorInfo): Promise<EstimatorStream> {
    const pending = this.loading.get(info.id);
    if (pending) return pending;
    const p = (async () => {
      const saved = await this.deps.loadCheckpoint(info.id).catch((err: Error) => {
        this.deps.logger.warn({ err: err.message, estimatorId: info.id }, 'could not read the checkpoint; starting fresh');
        return null;
      });
      let monitor: EstimatorMonitor | null = null;
      if (saved) {
        try {
          monitor = EstimatorMonitor.restore(saved.state);
        } catch (err) {
          this.deps.logger.warn({ err: (err as Error).message, estimatorId: info.id }, 'checkpoint unusable; starting fresh');
        }
      }
      if (monitor && this.deps.storedAfter) {
        // After a stop without a last checkpoint (a crash, a lost worker), samples committed
        // since the checkpoint were acknowledged and will not come again: the sequence check
        // takes them, or it would count them as lost.
        const stored = await this.deps.storedAfter(info.id, monitor.highestSeq).catch((err: Error) => {
          this.deps.logger.warn({ err: err.message, estimatorId: info.id }, 'could not read the samples stored after the checkpoint');
          return [];
        });
        if (stored.length > 0) {
          const taken = monitor.markStored(stored);
          this.deps.logger.info({ estimatorId: info.id, stored: stored.length, taken, fromSeq: stored[0].seq }, 'checks caught up with samples stored after their checkpoint');
        }
      }
      monitor ??= new EstimatorMonitor({ ...this.settings.monitor, m: info.measurementDim });
      const now = this.deps.clock.now();
      const st = saved?.status ?? null;
      const stream: EstimatorStream = {
        info,
        monitor,
        verdict: (st?.verdict as VerdictWord | undefined) ?? monitor.verdict,
        verdictSinceMs: st?.verdictSinceMs ?? now,
        lastSampleAtMs: st?.lastSampleAtMs ?? null,
        lastReceivedAtMs: st?.lastReceivedAtMs ?? null,
        lastSeq: st?.lastSeq ?? null,
        unsavedSamples: 0,
        lastStatusAtMs: 0,
        samplesSinceRefresh: 0,
        lastEvidenceAtMs: 0,
        checkpointDirty: false,
        rules: new AlertRuleState({ estimatorId: info.id, unitId: info.unitId }, this.settings.alertHoldMs),
        seenLost: 0,
        seenAccepted: 0,
        recentLost: 0,
        recentAccepted: 0,
      };
      const seq0 = monitor.report().checks?.sequence;
      stream.seenLost = seq0?.lost ?? 0;
      stream.seenAccepted = seq0?.accepted ?? 0;
      this.streams.set(info.id, stream);
      this.loading.delete(info.id);
      this.deps.metrics.estimatorsLive.set(this.streams.size);
      return stream;
    })();
    this.loading.set(info.id, p);
    return p;
  }

  /** Puts an estimator under watch (silence) before its first message after a restart. */
  async watch(info: EstimatorInfo): Promise<void> {
    if (!this.streams.has(info.id)) await this.loadStream(info);
  }

  /** The units whose estimators have checks in memory. */
  streamUnitKeys(): Set<string> {
    return new Set([...this.streams.values()].map((s) => s.info.unitKey));
  }

  /**
   * Lets go of some units' estimators (a partitioned worker releasing a partition): with
   * `save`, writes their status and checkpoints and waits for the commit; then forgets
   * their checks, so a later claim loads them again from the checkpoints. Without `save`
   * (the claim was lost: another worker may hold them already) nothing is written.
   */
  async release(unitKeys: Set<string>, save = true): Promise<number> {
    await Promise.all(this.loading.values());
    const now = this.deps.clock.now();
    const rows: { unitKey: string; parts: { status: StatusRow[]; alerts: AlertOp[]; checkpoints: { estimatorId: number; state: unknown; samplesSeen: number }[] } }[] = [];
    const alerts: AlertOp[] = [];
    let forgotten = 0;
    for (const [id, stream] of this.streams) {
      if (!unitKeys.has(stream.info.unitKey)) continue;
      this.streams.delete(id);
      forgotten += 1;
      if (!save) continue;
      const r = this.refresh(stream, now, stream.verdict === 'silent');
      const state = stream.monitor.serialize();
      rows.push({ unitKey: stream.info.unitKey, parts: { ...r, checkpoints: [{ estimatorId: stream.info.id, state, samplesSeen: state.samples }] } });
      alerts.push(...r.alerts);
    }
    for (const unitKey of unitKeys) this.unitQuarantine.delete(unitKey);
    this.deps.metrics.estimatorsLive.set(this.streams.size);
    // Each in its unit's lane, behind that unit's samples.
    if (rows.length > 0) await this.deps.writer.writeByUnit(rows);
    this.emitAlerts(alerts);
    return forgotten;
  }

  /** Adopts the live alerts found in the database at start, so they clear when their condition is gone. */
  async adoptLiveAlert(info: EstimatorInfo, rule: RuleName, openedAtMs: number): Promise<void> {
    const stream = this.streams.get(info.id) ?? (await this.loadStream(info));
    stream.rules.adopt(rule, openedAtMs);
  }

  private quarantineRows(
    unitKey: string | null,
    estimatorKey: string | null,
    estimatorId: number | null,
    topic: string,
    payload: Buffer,
    rejected: { reason: QuarantineReason; index: number | null }[],
    now: number,
  ): QuarantineRow[] {
    const cap = this.settings.quarantinePayloadBytes;
    const kept = payload.length > cap ? payload.subarray(0, cap) : payload;
    return rejected.map(({ reason, index }) => {
      this.deps.metrics.quarantined.inc({ reason: reason.code });
      return {
        receivedAtMs: now,
        unitKey,
        estimatorKey,
        estimatorId,
        topic,
        reasonCode: reason.code,
        reason: reasonText(reason.message),
        payload: kept,
        payloadBytes: payload.length,
        sampleIndex: index,
      };
    });
  }

  private async quarantine(
    unitKey: string,
    estimatorKey: string,
    estimatorId: number | null,
    topic: string,
    payload: Buffer,
    rejected: { reason: QuarantineReason; index: number | null }[],
    now: number,
  ): Promise<void> {
    const rows = this.quarantineRows(unitKey, estimatorKey, estimatorId, topic, payload, rejected, now);
    await this.deps.writer.write({ quarantine: rows }, unitKey);
    await this.noteQuarantine(unitKey, rows.length, now);
  }

  /** Counts a unit's quarantined payloads and raises or clears its quarantine-rate alert. */
  private async noteQuarantine(unitKey: string, count: number, now: number): Promise<void> {
    let q = this.unitQuarantine.get(unitKey);
    if (!q) {
      const unitId = await this.deps.unitIdOf(unitKey);
      q = { times: [], rules: new AlertRuleState({ estimatorId: null, unitId }, this.settings.alertHoldMs), unitId };
      this.unitQuarantine.set(unitKey, q);
    }
    for (let i = 0; i < count; i++) q.times.push(now);
    await this.evaluateQuarantineRate(unitKey, q, now);
  }

  private async evaluateQuarantineRate(
    unitKey: string,
    q: { times: number[]; rules: AlertRuleState; unitId: number | null },
    now: number,
  ): Promise<void> {
    const windowMs = 5 * 60_000;
    while (q.times.length > 0 && q.times[0] < now - windowMs) q.times.shift();
    const conditions =
      q.times.length >= this.settings.quarantineAlertCount
        ? [
            {
              rule: 'quarantine-rate' as const,
              severity: RULE_SEVERITY['quarantine-rate'],
              summary: `${q.times.length} payloads from unit ${unitKey} quarantined in the last 5 minutes`,
              evidence: { unit: unitKey, quarantinedLast5Min: q.times.length, threshold: this.settings.quarantineAlertCount },
            },
          ]
        : [];
    const ops = q.rules.evaluate(conditions, new Set<RuleName>(['quarantine-rate']), now);
    // Evidence refreshes of a quarantine flood are not worth a write each.
    const worth = ops.filter((o) => o.kind !== 'evidence');
    if (worth.length > 0) {
      await this.deps.writer.write({ alerts: worth }, unitKey);
      this.emitAlerts(worth);
    }
  }

  /**
   * Periodic work (every few seconds): silence, rule refresh for quiet estimators,
   * the quarantine-rate clear. Returns the rows to write; the caller writes them.
   */
  async sweep(): Promise<void> {
    const now = this.deps.clock.now();
    // While the service itself is behind (its writes queue up), quiet streams may be
    // waiting on us rather than silent: silence is judged only when we keep up.
    const behind = this.deps.writer.pendingSamples() > this.settings.silenceJudgedBelowQueue;
    // And when messages reach the checks late (sockets not yet read, messages held by the
    // broker), every unit's quiet is longer by that much: silence waits for it too.
    const lag = this.intakeLagMs(now);
    const writes: { unitKey: string; parts: { status: StatusRow[]; alerts: AlertOp[] } }[] = [];
    const alerts: AlertOp[] = [];
    const verdictEvents: { stream: EstimatorStream; previous: VerdictWord }[] = [];
    for (const stream of this.streams.values()) {
      if (stream.lastReceivedAtMs === null) continue;
      const silentAfter = Math.max(stream.info.expectedIntervalMs * this.settings.silenceFactor, this.settings.silenceFloorMs);
      // Silence counts from the later of the last sample and this service's start: while the
      // service was down nobody could hear the units, and after a restart they need a moment
      // to reconnect before their quiet means anything.
      const silent = !behind && now - Math.max(stream.lastReceivedAtMs, this.startedAtMs) > silentAfter + lag;
      const turnedSilent = silent && stream.verdict !== 'silent';
      if (turnedSilent) {
        verdictEvents.push({ stream, previous: stream.verdict });
        stream.verdict = 'silent';
        stream.verdictSinceMs = now;
      }
      // (When samples come back, handle() sets the checks' verdict again.)
      // A stream that publishes gets its status and rules looked at by handle(); the sweep
      // takes those that have been quiet for two status periods (units sending a batch every
      // few seconds would otherwise be refreshed here too, thousands in one turn).
      if (turnedSilent || now - stream.lastStatusAtMs >= 2 * this.settings.statusEveryMs) {
        const r = this.refresh(stream, now, silent);
        writes.push({ unitKey: stream.info.unitKey, parts: r });
        alerts.push(...r.alerts);
      }
    }
    for (const [unitKey, q] of this.unitQuarantine) {
      if (q.rules.liveRules().length > 0) await this.evaluateQuarantineRate(unitKey, q, now);
    }
    if (writes.length === 0) return;
    await this.deps.writer.writeByUnit(writes);
    for (const { stream, previous } of verdictEvents) {
      this.deps.events.emit('verdict', {
        estimatorId: stream.info.id,
        unitId: stream.info.unitId,
        verdict: 'silent',
        previous,
        atMs: now,
      });
    }
    this.emitAlerts(alerts);
  }

  /**
   * Checkpoints of the estimators whose checks changed since their last checkpoint: at
   * most `limit` per call, taking up where the last call stopped, so the fleet is saved
   * a slice at a time instead of in one statement that every sample waits behind.
   */
  async checkpoint(limit = Infinity): Promise<number> {
    const ids = [...this.streams.keys()];
    const rows = [];
    let k = 0;
    for (; k < ids.length && rows.length < limit; k++) {
      const stream = this.streams.get(ids[(this.checkpointCursor + k) % ids.length])!;
      if (!stream.checkpointDirty) continue;
      stream.checkpointDirty = false;
      const state = stream.monitor.serialize();
      rows.push({ unitKey: stream.info.unitKey, parts: { checkpoints: [{ estimatorId: stream.info.id, state, samplesSeen: state.samples }] } });
    }
    if (ids.length > 0) this.checkpointCursor = (this.checkpointCursor + k) % ids.length;
    // Each in its unit's lane, behind that unit's samples: a checkpoint never commits ahead of the samples it has seen.
    if (rows.length > 0) await this.deps.writer.writeByUnit(rows);
    return rows.length;
  }

  private checkpointCursor = 0;

  private readonly intakeLag = new IntakeLag();

  private noteIntakeLag(raws: RawSample[], now: number): void {
    let newest = Number.NaN;
    for (const r of raws) {
      const t = typeof r.t === 'number' ? r.t : Date.parse(r.t);
      if (Number.isFinite(t) && !(t <= newest)) newest = t;
    }
    this.intakeLag.note(newest, now);
  }

  /** How late messages reach the checks (ms; see intake-lag.ts). */
  intakeLagMs(now: number): number {
    return this.intakeLag.lagMs(now);
  }
}

/** What the fleet screens need of a report, small enough to store per estimator. */
export function summarizeReport(r: EstimatorReport): Record<string, unknown> {
  const c = r.checks;
  return {
    verdict: r.verdict,
    reasons: r.reasons,
    samples: r.samples,
    pValue: r.pValue,
    m: r.m,
    nis: c
      ? {
          ready: c.nis.ready,
          average: c.nis.average,
          expected: r.m,
          averageBounds: c.nis.averageBounds,
          pValue: c.nis.pValue,
          exceedanceRate: c.nis.exceedances.rate,
          expectedExceedanceRate: c.nis.exceedances.expectedRate,
        }
      : null,
    cusum: c?.cusum ? { up: c.cusum.up.statistic / c.cusum.up.threshold, down: c.cusum.down.statistic / c.cusum.down.threshold } : null,
    whiteness: c ? { ready: c.whiteness.ready, q: c.whiteness.statistic, pValue: c.whiteness.pValue } : null,
    bias: c ? { ready: c.bias.ready, pValue: c.bias.pValue } : null,
    sequence: c ? { lost: c.sequence.lost, duplicates: c.sequence.duplicates, late: c.sequence.late } : null,
  };
}

export function worse(a: VerdictWord, b: VerdictWord): VerdictWord {
  return VERDICT_RANK[a] >= VERDICT_RANK[b] ? a : b;
}

export type { Verdict };
