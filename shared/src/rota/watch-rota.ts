/**
 * The watch rota: who is on watch, for the whole fleet or for one site, at any
 * instant. Pure TypeScript (no I/O), shared by the ingest service and the dashboard.
 *
 * Time zones come from the IANA tz database through luxon (which reads it from the
 * platform's Intl/ICU data); this module adds only the rota's own rules on top.
 *
 * Rules (the contract; the specs check each one):
 * - Weekly schedule: each shift names an ISO weekday (1 = Monday … 7 = Sunday), a
 *   handover local time "HH:MM" in the rota's zone, and the person on watch from that
 *   handover until the next handover in the week (wrapping from Sunday to Monday).
 * - Intervals are half-open, [start, end): at the handover instant the new person is
 *   on watch; one millisecond before, the previous person still is.
 * - A handover local time that does not exist that day (the spring-forward gap) hands
 *   over at the first instant after the gap, i.e. at the transition itself. A local
 *   time that happens twice (the fall-back overlap) hands over at the earlier instant.
 *   (luxon on its own moves a gap time forward by the gap's length and picks an
 *   overlap instant from the zone's current offset; we resolve both ourselves.)
 *   When two handovers of one day land on the same instant because of this, the one
 *   later in the week's order wins and the other lasts no time at all.
 * - Overrides: one-off [fromMs, toMs) spans in UTC milliseconds that win over the
 *   weekly schedule. Overlapping overrides are allowed; where they overlap, the one
 *   created last (greatest `createdAtMs`, then the later one in the list) wins.
 * - A handover is a change of person. Consecutive spans held by the same person (two
 *   shifts in a row, an override for the person already on watch) are one watch, so
 *   `nextHandovers` never lists a person handing over to themselves, and `onWatchAt`
 *   reports the whole watch. Its start or end is null only when the same person is on
 *   watch for ever in that direction (every weekly shift names them).
 */
import { DateTime, IANAZone } from 'luxon';

export type IsoWeekday = 1 | 2 | 3 | 4 | 5 | 6 | 7;

export type RotaScope = { kind: 'fleet' } | { kind: 'site'; siteId: number };

export interface WatchShift {
  /** ISO weekday of the handover: 1 = Monday … 7 = Sunday. */
  weekday: IsoWeekday;
  /** Local handover time in the rota's zone, "HH:MM" (00:00–23:59). */
  handover: string;
  /** The person on watch from this handover until the next one. */
  userId: number;
}

export interface WatchOverride {
  /** Start, inclusive, UTC ms. */
  fromMs: number;
  /** End, exclusive, UTC ms. */
  toMs: number;
  userId: number;
  note?: string;
  /** When the override was made, UTC ms; among overlapping overrides the latest wins. */
  createdAtMs: number;
}

export interface WatchRota {
  id: number;
  name: string;
  scope: RotaScope;
  /** IANA time zone name, e.g. "Europe/London". */
  timeZone: string;
  shifts: WatchShift[];
  /** Next in line after the person on watch, in order. */
  backups: number[];
  overrides: WatchOverride[];
}

export type RotaIssueCode =
  | 'empty_name'
  | 'bad_scope'
  | 'unknown_zone'
  | 'no_shifts'
  | 'bad_weekday'
  | 'bad_time'
  | 'duplicate_handover'
  | 'bad_user'
  | 'duplicate_backup'
  | 'bad_override_range'
  | 'bad_override_created';

export interface RotaIssue {
  code: RotaIssueCode;
  /** Where, e.g. "shifts[2].handover". */
  path: string;
  message: string;
}

export type RotaValidation = { ok: true } | { ok: false; issues: RotaIssue[] };

export class WatchRotaError extends Error {
  constructor(readonly issues: RotaIssue[]) {
    super(`invalid watch rota: ${issues.map((i) => `${i.path}: ${i.message}`).join('; ')}`);
    this.name = 'WatchRotaError';
  }
}

export interface OnWatch {
  userId: number;
  /** What decided it at the asked instant. */
  source: 'weekly' | 'override';
  /** Start of this person's watch (inclusive), null if they have always been on watch. */
  shiftStartMs: number | null;
  /** End of this person's watch (exclusive; the next handover), null if it never ends. */
  shiftEndMs: number | null;
}

export interface Handover {
  atMs: number;
  /** The person on watch from atMs. */
  userId: number;
  /** The person handing over. */
  previousUserId: number;
  source: 'weekly' | 'override';
}

const HHMM = /^([01]\d|2[0-3]):([0-5]\d)$/;
const MINUTE_MS = 60_000;
const DAY_MS = 86_400_000;

function isUserId(v: unknown): v is number {
  return typeof v === 'number' && Number.isSafeInteger(v) && v > 0;
}

/** Every problem with a rota definition, or ok. Overlapping overrides are not a problem (the last created wins). */
export function validateWatchRota(rota: WatchRota): RotaValidation {
  const issues: RotaIssue[] = [];
  const add = (code: RotaIssueCode, path: string, message: string) => issues.push({ code, path, message });

  if (typeof rota.name !== 'string' || rota.name.trim() === '') add('empty_name', 'name', 'the rota needs a name');
  const scope = rota.scope as RotaScope | undefined;
  if (!scope || (scope.kind !== 'fleet' && !(scope.kind === 'site' && isUserId(scope.siteId)))) {
    add('bad_scope', 'scope', 'scope must be the whole fleet or one site (a positive site id)');
  }
  if (typeof rota.timeZone !== 'string' || !IANAZone.isValidZone(rota.timeZone)) {
    add('unknown_zone', 'timeZone', `"${String(rota.timeZone)}" is not an IANA time zone known here`);
  }

  const shifts = Array.isArray(rota.shifts) ? rota.shifts : [];
  if (shifts.length === 0) add('no_shifts', 'shifts', 'the weekly schedule needs at least one shift');
  const seen = new Map<string, number>();
  shifts.forEach((s, i) => {
    const at = `shifts[${i}]`;
    if (!Number.isInteger(s.weekday) || s.weekday < 1 || s.weekday > 7) {
      add('bad_weekday', `${at}.weekday`, `weekday must be 1 (Monday) to 7 (Sunday), got ${String(s.weekday)}`);
    }
    if (typeof s.handover !== 'string' || !HHMM.test(s.handover)) {
      add('bad_time', `${at}.handover`, `handover must be a local time "HH:MM" from 00:00 to 23:59, got "${String(s.handover)}"`);
    } else {
      const key = `${s.weekday} ${s.handover}`;
      const first = seen.get(key);
      if (first !== undefined) add('duplicate_handover', `${at}.handover`, `shifts[${first}] already hands over on weekday ${s.weekday} at ${s.handover}`);
      else seen.set(key, i);
    }
    if (!isUserId(s.userId)) add('bad_user', `${at}.userId`, 'a shift needs a person (a positive user id)');
  });

  const backups = Array.isArray(rota.backups) ? rota.backups : [];
  const seenBackups = new Set<number>();
  backups.forEach((u, i) => {
    if (!isUserId(u)) add('bad_user', `backups[${i}]`, 'a backup must be a positive user id');
    else if (seenBackups.has(u)) add('duplicate_backup', `backups[${i}]`, `user ${u} is already in the backups`);
    seenBackups.add(u);
  });

  const overrides = Array.isArray(rota.overrides) ? rota.overrides : [];
  overrides.forEach((o, i) => {
    const at = `overrides[${i}]`;
    if (!Number.isSafeInteger(o.fromMs) || !Number.isSafeInteger(o.toMs) || o.fromMs >= o.toMs) {
      add('bad_override_range', at, 'an override needs whole-millisecond instants with fromMs before toMs');
    }
    if (!Number.isFinite(o.createdAtMs)) add('bad_override_created', `${at}.createdAtMs`, 'an override needs the instant it was made');
    if (!isUserId(o.userId)) add('bad_user', `${at}.userId`, 'an override needs a person (a positive user id)');
  });

  return issues.length === 0 ? { ok: true } : { ok: false, issues };
}

interface WeeklyHandover {
  atMs: number;
  userId: number;
}

interface Holder {
  userId: number;
  source: 'weekly' | 'override';
}

/** A validated rota with its zone and shifts ready for lookups. */
class CompiledRota {
  private readonly zone: IANAZone;
  /** Shifts in week order, as minutes after Monday 00:00 local. */
  private readonly shifts: { weekday: number; minute: number; userId: number }[];
  private readonly overrides: (WatchOverride & { order: number })[];
  /** Every weekly shift names the same person: weekly handovers never change who is on watch. */
  private readonly weeklyAllSame: boolean;
  /** Weekly handovers by the local Monday (ISO date) that starts their week. */
  private readonly weeks = new Map<string, WeeklyHandover[]>();

  constructor(rota: WatchRota) {
    const v = validateWatchRota(rota);
    if (!v.ok) throw new WatchRotaError(v.issues);
    this.zone = IANAZone.create(rota.timeZone);
    this.shifts = rota.shifts
      .map((s) => {
        const [h, m] = s.handover.split(':').map(Number);
        return { weekday: s.weekday, minute: h * 60 + m, userId: s.userId };
      })
      .sort((a, b) => a.weekday - b.weekday || a.minute - b.minute);
    this.overrides = rota.overrides.map((o, order) => ({ ...o, order }));
    this.weeklyAllSame = this.shifts.every((s) => s.userId === this.shifts[0].userId);
  }

  /**
   * The instant of a local wall-clock time (given as the UTC ms of the same
   * calendar fields): the earlier of two in an overlap, the transition for a gap.
   */
  private resolveLocal(wallMs: number): number {
    // The offsets in force a day either side (tz rules never change twice in a day).
    const before = this.zone.offset(wallMs - DAY_MS);
    const after = this.zone.offset(wallMs + DAY_MS);
    const candidates = [...new Set([before, after])]
      .map((o) => wallMs - o * MINUTE_MS)
      .filter((t) => wallMs - this.zone.offset(t) * MINUTE_MS === t)
      .sort((a, b) => a - b);
    if (candidates.length > 0) return candidates[0];
    // In a gap: the transition lies between the wall time read with either offset.
    let lo = wallMs - Math.max(before, after) * MINUTE_MS; // still the old offset
    let hi = wallMs - Math.min(before, after) * MINUTE_MS; // already the new offset
    const old = this.zone.offset(lo);
    while (hi - lo > 1) {
      const mid = Math.floor((lo + hi) / 2);
      if (this.zone.offset(mid) === old) lo = mid;
      else hi = mid;
    }
    return hi;
  }

  /** The weekly handovers of the local week starting on `monday` (a luxon date at local midnight). */
  private week(monday: DateTime): WeeklyHandover[] {
    const key = monday.toISODate()!;
    let list = this.weeks.get(key);
    if (!list) {
      const wallMonday = Date.UTC(monday.year, monday.month - 1, monday.day);
      list = this.shifts.map((s) => ({
        atMs: this.resolveLocal(wallMonday + (s.weekday - 1) * DAY_MS + s.minute * MINUTE_MS),
        userId: s.userId,
      }));
      if (this.weeks.size > 64) this.weeks.clear();
      this.weeks.set(key, list);
    }
    return list;
  }

  /** Weekly handovers of the local weeks before, of and after the one holding t, in time order. */
  private weeklyAround(t: number): WeeklyHandover[] {
    const monday = DateTime.fromMillis(t, { zone: this.zone }).startOf('week');
    return [...this.week(monday.minus({ weeks: 1 })), ...this.week(monday), ...this.week(monday.plus({ weeks: 1 }))];
  }

  /** The latest weekly handover at or before t. */
  private weeklyAtOrBefore(t: number): WeeklyHandover {
    let found: WeeklyHandover | undefined;
    for (const h of this.weeklyAround(t)) if (h.atMs <= t) found = h; // later in week order wins a tie
    return found!; // the previous local week lies wholly before t
  }

  private overrideAt(t: number): (WatchOverride & { order: number }) | undefined {
    let best: (WatchOverride & { order: number }) | undefined;
    for (const o of this.overrides) {
      if (o.fromMs <= t && t < o.toMs && (!best || o.createdAtMs > best.createdAtMs || (o.createdAtMs === best.createdAtMs && o.order > best.order))) {
        best = o;
      }
    }
    return best;
  }

  holderAt(t: number): Holder {
    const o = this.overrideAt(t);
    return o ? { userId: o.userId, source: 'override' } : { userId: this.weeklyAtOrBefore(t).userId, source: 'weekly' };
  }

  /**
   * The first instant after t where the holder may change, or Infinity. While an
   * override holds, only override boundaries matter; when every weekly shift names
   * the same person, weekly handovers never matter.
   */
  nextBoundary(t: number): number {
    let next = Infinity;
    const held = this.overrideAt(t) !== undefined;
    if (!held && !this.weeklyAllSame) {
      for (const h of this.weeklyAround(t)) if (h.atMs > t && h.atMs < next) next = h.atMs;
    }
    for (const o of this.overrides) {
      if (o.fromMs > t && o.fromMs < next) next = o.fromMs;
      if (o.toMs > t && o.toMs < next) next = o.toMs;
    }
    return next;
  }

  /** The start of the span of one holder that contains t, or -Infinity. */
  boundaryAtOrBefore(t: number): number {
    let prev = -Infinity;
    const held = this.overrideAt(t) !== undefined;
    if (!held && !this.weeklyAllSame) prev = this.weeklyAtOrBefore(t).atMs;
    for (const o of this.overrides) {
      if (o.fromMs <= t && o.fromMs > prev) prev = o.fromMs;
      if (o.toMs <= t && o.toMs > prev) prev = o.toMs;
    }
    return prev;
  }

  /** The next change of person strictly after t, or null if the person on watch at t stays for ever. */
  nextHandoverAfter(t: number, userId: number): Handover | null {
    // Terminates: outside overrides a weekly schedule with two people changes within a week.
    for (let b = this.nextBoundary(t); b !== Infinity; b = this.nextBoundary(b)) {
      const h = this.holderAt(b);
      if (h.userId !== userId) return { atMs: b, userId: h.userId, previousUserId: userId, source: h.source };
    }
    return null;
  }

  /** When the watch of the person on watch at t began, or null if they have always been on watch. */
  watchStart(t: number, userId: number): number | null {
    for (let b = this.boundaryAtOrBefore(t); b !== -Infinity; b = this.boundaryAtOrBefore(b - 1)) {
      if (this.holderAt(b - 1).userId !== userId) return b;
    }
    return null;
  }
}

function compile(rota: WatchRota): CompiledRota {
  return new CompiledRota(rota);
}

function assertInstant(name: string, ms: number): void {
  if (!Number.isFinite(ms)) throw new RangeError(`${name} must be a finite instant in ms, got ${ms}`);
}

/** Who is on watch at `atMs` (UTC ms), why, and the span of their watch. Throws WatchRotaError on an invalid rota. */
export function onWatchAt(rota: WatchRota, atMs: number): OnWatch {
  assertInstant('atMs', atMs);
  const c = compile(rota);
  const t = Math.floor(atMs);
  const h = c.holderAt(t);
  const next = c.nextHandoverAfter(t, h.userId);
  return { userId: h.userId, source: h.source, shiftStartMs: c.watchStart(t, h.userId), shiftEndMs: next ? next.atMs : null };
}

/**
 * The next `count` handovers (changes of person) strictly after `fromMs`, in time
 * order. Fewer when the same person stays on watch for ever.
 */
export function nextHandovers(rota: WatchRota, fromMs: number, count: number): Handover[] {
  assertInstant('fromMs', fromMs);
  if (!Number.isInteger(count) || count < 0) throw new RangeError(`count must be a whole number ≥ 0, got ${count}`);
  const c = compile(rota);
  const out: Handover[] = [];
  let t = Math.floor(fromMs);
  let userId = c.holderAt(t).userId;
  while (out.length < count) {
    const h = c.nextHandoverAfter(t, userId);
    if (!h) break;
    out.push(h);
    t = h.atMs;
    userId = h.userId;
  }
  return out;
}

/**
 * Whom to page at `atMs`, in order: the person on watch, then the backups in the
 * rota's order, each person once (a backup who is on watch is not asked twice).
 */
export function handoffChain(rota: WatchRota, atMs: number): number[] {
  const first = onWatchAt(rota, atMs).userId;
  return [...new Set([first, ...rota.backups])];
}
