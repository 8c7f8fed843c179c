import { DateTime, IANAZone } from 'luxon';

/**
 * Wall-clock times in a rota's time zone, and the instants they stand for.
 *
 * A local time that does not exist (the spring-forward gap) means the first instant after
 * the gap, i.e. the transition itself; a local time that happens twice (the fall-back
 * overlap) means the earlier instant. The watch rota reads its handover times the same way.
 */

const LOCAL_INPUT = /^(\d{4})-(\d{2})-(\d{2})T(\d{2}):(\d{2})(?::(\d{2}))?$/;

/** Whether the name is an IANA time zone the browser knows. */
export function isTimeZone(zone: string): boolean {
  return !!zone && IANAZone.isValidZone(zone);
}

/** The IANA time zones the browser knows, sorted, always including `extra` (a rota's current zone) when valid. */
export function timeZoneNames(extra: string[] = []): string[] {
  const known = typeof Intl.supportedValuesOf === 'function' ? Intl.supportedValuesOf('timeZone') : [];
  return [...new Set([...known, 'UTC', ...extra.filter(isTimeZone)])].sort();
}

/** The viewer's own time zone. */
export function viewerTimeZone(): string {
  return Intl.DateTimeFormat().resolvedOptions().timeZone || 'UTC';
}

/**
 * The instant (ISO 8601, UTC) that a `<input type="datetime-local">` value ('YYYY-MM-DDTHH:MM'
 * with optional ':SS') means in `zone`; null when the text or the zone is not valid.
 */
export function zonedLocalToInstant(local: string, zone: string): string | null {
  const m = LOCAL_INPUT.exec(local.trim());
  if (!m || !isTimeZone(zone)) return null;
  const [year, month, day, hour, minute, second] = m.slice(1).map((x) => Number(x ?? 0));
  // The wall-clock reading as if it were UTC; the instant is this minus the zone's offset then.
  const L = Date.UTC(year, month - 1, day, hour, minute, second);
  const wall = new Date(L);
  if (wall.getUTCFullYear() !== year || wall.getUTCMonth() !== month - 1 || wall.getUTCDate() !== day || hour > 23 || minute > 59 || second > 59) {
    return null;
  }
  const tz = IANAZone.create(zone);
  const offsetMs = (t: number) => tz.offset(t) * 60_000;
  // Offsets in force up to a day and a half either side cover every transition near L.
  const offsets = [...new Set([offsetMs(L - 36 * 3_600_000), offsetMs(L), offsetMs(L + 36 * 3_600_000)])];
  const valid = offsets.map((o) => L - o).filter((t) => offsetMs(t) === L - t);
  if (valid.length) return new Date(Math.min(...valid)).toISOString();
  // In the gap: the transition lies between the instant read with the later offset (before
  // the change) and the one read with the earlier offset (after it). Bisect to the millisecond.
  const candidates = offsets.map((o) => L - o);
  let before = Math.min(...candidates);
  let after = Math.max(...candidates);
  const offBefore = offsetMs(before);
  while (after - before > 1) {
    const mid = Math.floor((before + after) / 2);
    if (offsetMs(mid) === offBefore) before = mid;
    else after = mid;
  }
  return new Date(after).toISOString();
}

/** An instant as a `datetime-local` value ('YYYY-MM-DDTHH:MM') in `zone`. */
export function instantToZonedLocal(iso: string, zone: string): string {
  const t = DateTime.fromISO(iso, { zone });
  return t.isValid ? t.toFormat("yyyy-MM-dd'T'HH:mm") : '';
}

/** "Mon 9 Mar, 08:00 GMT": a time as read in `zone`, with the zone's short name. */
export function formatInZone(iso: string | null | undefined, zone: string, locale?: string): string {
  if (!iso) return '—';
  const t = DateTime.fromISO(iso, { zone, ...(locale ? { locale } : {}) });
  if (!t.isValid) return '—';
  return t.toLocaleString({ weekday: 'short', day: 'numeric', month: 'short', hour: '2-digit', minute: '2-digit', hourCycle: 'h23', timeZoneName: 'short' });
}

/** A time as read on the rota and, when it reads differently there, as the viewer reads it. */
export interface TwoZoneTime {
  rota: string;
  /** Null when the viewer's clock shows the same (same offset at that instant). */
  viewer: string | null;
}

export function inRotaAndViewerZone(iso: string | null | undefined, rotaZone: string, viewerZone = viewerTimeZone(), locale?: string): TwoZoneTime {
  const rota = formatInZone(iso, rotaZone, locale);
  if (!iso) return { rota, viewer: null };
  const t = Date.parse(iso);
  const sameClock = isTimeZone(rotaZone) && isTimeZone(viewerZone) && IANAZone.create(rotaZone).offset(t) === IANAZone.create(viewerZone).offset(t);
  return { rota, viewer: sameClock ? null : formatInZone(iso, viewerZone, locale) };
}

/** "UTC+01:00": the zone's offset from UTC at an instant (now by default). */
export function offsetLabel(zone: string, at = Date.now()): string {
  if (!isTimeZone(zone)) return '';
  const minutes = IANAZone.create(zone).offset(at);
  if (minutes === 0) return 'UTC±00:00';
  const sign = minutes < 0 ? '−' : '+';
  const a = Math.abs(minutes);
  return `UTC${sign}${String(Math.floor(a / 60)).padStart(2, '0')}:${String(a % 60).padStart(2, '0')}`;
}
