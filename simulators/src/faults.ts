// Injectable faults: what they do, when they are on, and their command-line form.
//
// Measurement and filter faults change the simulated physics or the filter:
//   noise=F      the measurement noise's standard deviation ×F (its covariance ×F²)
//   bias=b       a constant offset b on one measured component (component=i, default 0);
//                flicker=D makes it come and go (on for D, off for D), as near obstacles
//                that reflect the positioning signal
//   qlow=F       the filter assumes process noise Q/F while the plant keeps its own
//                (model mismatch: the truth's process noise is F× what the filter assumes)
//   stuck        the sensor freezes: every measurement repeats the last one before the fault
// Message faults change what leaves the unit; the filter keeps running underneath:
//   dropout=f    a fraction f of samples is never published (sequence gaps)
//   silence      nothing is published
//   duplicate=f  a fraction f of messages is published twice
//   reorder=f    a fraction f of samples is held back and published after the next one
//   malformed=f  a fraction f of samples is replaced by a malformed payload (kinds=a+b to choose)
//
// Command-line form: <unit>[/<estimator>]:<kind>[=<value>][,<name>=<value>…][@<when>]
//   <unit> may be * (every unit); without /<estimator> the fault hits every estimator of the unit.
//   <when>: <from>[-<to>][/<every>] in seconds since start (90, 90s, 2m, 1h, 500ms),
//   or #<k>[-#<k2>] in sample numbers (seq). Windows are half-open: from ≤ · < to.
//   Examples: tractor-07/position:bias=2@60s-180s
//             tractor-07/position:bias=2,flicker=6s@1m-3m/5m   (2 minutes in every 5, from 1 min)
//             cabinet-04/thermal:noise=3@60s                     (from 60 s on)
//             cabinet-09:silence@90s
import { isMalformedKind, type MalformedKind } from './malformed';

/** When a fault is on. Every bound given must hold; none given means always. */
export interface FaultSchedule {
  /** On from this many seconds after start (inclusive). */
  fromS?: number;
  /** Off from this many seconds after start (exclusive bound of the window). */
  toS?: number;
  /** Repeats the window [fromS, toS) every everyS seconds (needs toS). */
  everyS?: number;
  /** On from this sample number (seq, inclusive). */
  fromSeq?: number;
  /** Off from this sample number (seq). */
  toSeq?: number;
}

export type MeasurementFault =
  | { kind: 'noise'; factor: number }
  | { kind: 'bias'; offset: number; component: number; flickerS?: number }
  | { kind: 'qlow'; factor: number }
  | { kind: 'stuck' };

export type MessageFault =
  | { kind: 'dropout'; fraction: number }
  | { kind: 'silence' }
  | { kind: 'duplicate'; fraction: number }
  | { kind: 'reorder'; fraction: number }
  | { kind: 'malformed'; fraction: number; kinds?: MalformedKind[] };

export type FaultEffect = MeasurementFault | MessageFault;
export type Fault = FaultEffect & { when?: FaultSchedule };
export type ScheduledMeasurementFault = MeasurementFault & { when?: FaultSchedule };
export type ScheduledMessageFault = MessageFault & { when?: FaultSchedule };

/** A fault aimed at a unit (or '*', every unit) and optionally one of its estimators. */
export interface FleetFault {
  unit: string;
  estimator?: string;
  fault: Fault;
}

const measurementKinds = new Set(['noise', 'bias', 'qlow', 'stuck']);

export function isMeasurementFault(f: Fault): f is ScheduledMeasurementFault {
  return measurementKinds.has(f.kind);
}

export function isMessageFault(f: Fault): f is ScheduledMessageFault {
  return !measurementKinds.has(f.kind);
}

/** Whether a schedule is on for sample number seq at elapsedS seconds after start. */
export function isActive(when: FaultSchedule | undefined, seq: number, elapsedS: number): boolean {
  if (!when) return true;
  if (when.fromSeq !== undefined && seq < when.fromSeq) return false;
  if (when.toSeq !== undefined && seq >= when.toSeq) return false;
  const from = when.fromS ?? 0;
  if (elapsedS < from) return false;
  if (when.toS === undefined) return true;
  if (when.everyS !== undefined) return (elapsedS - from) % when.everyS < when.toS - from;
  return elapsedS < when.toS;
}

export class FaultSpecError extends Error {
  override readonly name = 'FaultSpecError';
}

/** Throws FaultSpecError when a fault's numbers make no sense. */
export function validateFault(f: Fault, label: string = f.kind): void {
  const fail = (what: string): never => {
    throw new FaultSpecError(`${label}: ${what}`);
  };
  const positive = (v: number, name: string) => {
    if (!(Number.isFinite(v) && v > 0)) fail(`${name} must be a positive number, got ${v}`);
  };
  const fraction = (v: number) => {
    if (!(Number.isFinite(v) && v > 0 && v <= 1)) fail(`the fraction must be in (0, 1], got ${v}`);
  };
  switch (f.kind) {
    case 'noise':
    case 'qlow':
      positive(f.factor, 'the factor');
      break;
    case 'bias':
      if (!Number.isFinite(f.offset)) fail(`the offset must be a finite number, got ${f.offset}`);
      if (!Number.isInteger(f.component) || f.component < 0) fail(`component must be an index ≥ 0, got ${f.component}`);
      if (f.flickerS !== undefined) positive(f.flickerS, 'flicker');
      break;
    case 'dropout':
    case 'duplicate':
    case 'reorder':
    case 'malformed':
      fraction(f.fraction);
      break;
    case 'stuck':
    case 'silence':
      break;
    default:
      fail(`unknown fault kind`);
  }
  const w = f.when;
  if (!w) return;
  for (const [name, v] of Object.entries(w)) {
    if (v !== undefined && !(Number.isFinite(v) && v >= 0)) fail(`${name} must be a number ≥ 0, got ${v}`);
  }
  if (w.toS !== undefined && w.toS <= (w.fromS ?? 0)) fail(`the window ends (${w.toS} s) before it starts (${w.fromS ?? 0} s)`);
  if (w.toSeq !== undefined && w.toSeq <= (w.fromSeq ?? 0)) fail(`the window ends (#${w.toSeq}) before it starts (#${w.fromSeq ?? 0})`);
  if (w.everyS !== undefined) {
    if (w.toS === undefined) fail('a repeating window needs an end (from-to/every)');
    else if (w.everyS < w.toS - (w.fromS ?? 0)) fail(`the window (${w.toS - (w.fromS ?? 0)} s) is longer than its period (${w.everyS} s)`);
  }
}

const durationPattern = /^(\d+(?:\.\d+)?|\.\d+)(ms|s|m|h)?$/;

/** Seconds from '90', '90s', '1.5m', '2h', '500ms'. */
export function parseDuration(text: string): number {
  const m = durationPattern.exec(text.trim());
  if (!m) throw new FaultSpecError(`"${text}" is not a duration (examples: 90, 90s, 2m, 1h, 500ms)`);
  const v = Number(m[1]);
  switch (m[2]) {
    case 'ms':
      return v / 1000;
    case 'm':
      return v * 60;
    case 'h':
      return v * 3600;
    default:
      return v;
  }
}

function formatDuration(s: number): string {
  if (s !== 0 && s % 3600 === 0) return `${s / 3600}h`;
  if (s !== 0 && s % 60 === 0) return `${s / 60}m`;
  return `${s}s`;
}

function parseSchedule(text: string): FaultSchedule {
  const bySeq = /^#(\d+)(?:-#?(\d+))?$/.exec(text);
  if (bySeq) {
    const w: FaultSchedule = { fromSeq: Number(bySeq[1]) };
    if (bySeq[2] !== undefined) w.toSeq = Number(bySeq[2]);
    return w;
  }
  const byTime = /^([^-/]+)(?:-([^/]+))?(?:\/(.+))?$/.exec(text);
  if (!byTime) throw new FaultSpecError(`"@${text}" is not a schedule (examples: @60s, @60s-180s, @1m-3m/5m, @#100-#200)`);
  const w: FaultSchedule = { fromS: parseDuration(byTime[1]) };
  if (byTime[2] !== undefined) w.toS = parseDuration(byTime[2]);
  if (byTime[3] !== undefined) w.everyS = parseDuration(byTime[3]);
  return w;
}

function formatSchedule(w: FaultSchedule): string {
  if (w.fromSeq !== undefined || w.toSeq !== undefined) {
    return `@#${w.fromSeq ?? 0}${w.toSeq !== undefined ? `-#${w.toSeq}` : ''}`;
  }
  let s = `@${formatDuration(w.fromS ?? 0)}`;
  if (w.toS !== undefined) s += `-${formatDuration(w.toS)}`;
  if (w.everyS !== undefined) s += `/${formatDuration(w.everyS)}`;
  return s;
}

function parseNumber(text: string | undefined, what: string): number {
  if (text === undefined || text.trim() === '') throw new FaultSpecError(`${what} needs a value`);
  const v = Number(text);
  if (!Number.isFinite(v)) throw new FaultSpecError(`${what}: "${text}" is not a number`);
  return v;
}

const specPattern = /^([^:]+):([a-z]+)(?:=([^,@]*))?((?:,[a-z]+=[^,@]*)*)(?:@(.*))?$/;
const targetPattern = /^(\*|[a-z0-9][a-z0-9_-]{0,63})(?:\/([a-z0-9][a-z0-9_-]{0,63}))?$/;

/**
 * Parses the command-line form, e.g. `tractor-07/position:bias=2,component=1@60s-180s`.
 * Throws FaultSpecError with a message that says what was wrong.
 */
export function parseFaultSpec(spec: string): FleetFault {
  const m = specPattern.exec(spec.trim());
  if (!m) {
    throw new FaultSpecError(
      `"${spec}" is not a fault (form: <unit>[/<estimator>]:<kind>[=<value>][,<name>=<value>]…[@<when>], e.g. tractor-07/position:bias=2@60s-180s)`,
    );
  }
  const [, targetText, kind, valueText, paramText, whenText] = m;
  const target = targetPattern.exec(targetText);
  if (!target) throw new FaultSpecError(`"${targetText}" is not <unit> or <unit>/<estimator> (lower-case keys, or * for every unit)`);
  const params = new Map<string, string>();
  for (const part of paramText.split(',').filter(Boolean)) {
    const [name, value] = part.split('=');
    params.set(name, value);
  }
  const label = `"${spec}"`;
  const allowOnly = (...names: string[]) => {
    for (const name of params.keys()) {
      if (!names.includes(name)) {
        throw new FaultSpecError(`${label}: ${kind} takes no parameter "${name}"${names.length ? ` (it takes ${names.join(', ')})` : ''}`);
      }
    }
  };
  const noValue = () => {
    if (valueText !== undefined) throw new FaultSpecError(`${label}: ${kind} takes no value`);
  };
  let effect: FaultEffect;
  switch (kind) {
    case 'noise':
    case 'qlow':
      allowOnly();
      effect = { kind, factor: parseNumber(valueText, `${label}: ${kind}`) };
      break;
    case 'bias': {
      allowOnly('component', 'flicker');
      effect = {
        kind,
        offset: parseNumber(valueText, `${label}: bias`),
        component: params.has('component') ? parseNumber(params.get('component'), `${label}: component`) : 0,
      };
      const flicker = params.get('flicker');
      if (flicker !== undefined) effect.flickerS = parseDuration(flicker);
      break;
    }
    case 'stuck':
    case 'silence':
      allowOnly();
      noValue();
      effect = { kind };
      break;
    case 'dropout':
    case 'duplicate':
    case 'reorder':
      allowOnly();
      effect = { kind, fraction: parseNumber(valueText, `${label}: ${kind}`) };
      break;
    case 'malformed': {
      allowOnly('kinds');
      effect = { kind, fraction: parseNumber(valueText, `${label}: malformed`) };
      const kinds = params.get('kinds');
      if (kinds !== undefined) {
        const list = kinds.split('+');
        for (const k of list) {
          if (!isMalformedKind(k)) throw new FaultSpecError(`${label}: "${k}" is not a kind of malformed payload`);
        }
        effect.kinds = list as MalformedKind[];
      }
      break;
    }
    default:
      throw new FaultSpecError(
        `${label}: unknown fault "${kind}" (noise, bias, qlow, stuck, dropout, silence, duplicate, reorder, malformed)`,
      );
  }
  const fault: Fault = whenText === undefined ? effect : { ...effect, when: parseSchedule(whenText) };
  validateFault(fault, label);
  const out: FleetFault = { unit: target[1], fault };
  if (target[2] !== undefined) out.estimator = target[2];
  return out;
}

/** The command-line form of a fleet fault (parseFaultSpec reads it back). */
export function formatFaultSpec(f: FleetFault): string {
  const target = f.estimator === undefined ? f.unit : `${f.unit}/${f.estimator}`;
  const fault = f.fault;
  let body: string;
  switch (fault.kind) {
    case 'noise':
    case 'qlow':
      body = `${fault.kind}=${fault.factor}`;
      break;
    case 'bias':
      body = `bias=${fault.offset}`;
      if (fault.component !== 0) body += `,component=${fault.component}`;
      if (fault.flickerS !== undefined) body += `,flicker=${formatDuration(fault.flickerS)}`;
      break;
    case 'stuck':
    case 'silence':
      body = fault.kind;
      break;
    case 'dropout':
    case 'duplicate':
    case 'reorder':
      body = `${fault.kind}=${fault.fraction}`;
      break;
    case 'malformed':
      body = `malformed=${fault.fraction}`;
      if (fault.kinds) body += `,kinds=${fault.kinds.join('+')}`;
      break;
  }
  return `${target}:${body}${fault.when ? formatSchedule(fault.when) : ''}`;
}

/** Whether a fleet fault is aimed at this unit's estimator. */
export function faultApplies(f: FleetFault, unit: string, estimator: string): boolean {
  return (f.unit === '*' || f.unit === unit) && (f.estimator === undefined || f.estimator === estimator);
}
