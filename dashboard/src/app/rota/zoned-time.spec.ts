import { formatInZone, inRotaAndViewerZone, instantToZonedLocal, isTimeZone, offsetLabel, timeZoneNames, zonedLocalToInstant } from './zoned-time';

// Transition instants from the IANA tz database (europe file): the United Kingdom moves
// its clocks at 01:00 UTC on the last Sunday of March (forward) and of October (back);
// the United States (America/New_York) at 02:00 local on the second Sunday of March.

describe('zonedLocalToInstant', () => {
  it('reads a datetime-local value as wall-clock time in the rota zone', () => {
    expect(zonedLocalToInstant('2026-01-15T08:00', 'Europe/London')).toBe('2026-01-15T08:00:00.000Z');
    expect(zonedLocalToInstant('2026-07-15T08:00', 'Europe/London')).toBe('2026-07-15T07:00:00.000Z');
    expect(zonedLocalToInstant('2026-07-15T08:00', 'America/New_York')).toBe('2026-07-15T12:00:00.000Z');
    expect(zonedLocalToInstant('2026-07-15T08:00:30', 'Asia/Kolkata')).toBe('2026-07-15T02:30:30.000Z');
  });

  it('gives the same instant whatever the viewer zone is (it depends on the rota zone only)', () => {
    expect(zonedLocalToInstant('2026-03-10T23:30', 'Pacific/Auckland')).toBe('2026-03-10T10:30:00.000Z');
  });

  it('takes a time inside the spring-forward gap as the transition itself', () => {
    // 2026-03-29 01:00 GMT becomes 02:00 BST; 01:30 does not exist in London that night.
    expect(zonedLocalToInstant('2026-03-29T01:30', 'Europe/London')).toBe('2026-03-29T01:00:00.000Z');
    expect(zonedLocalToInstant('2026-03-29T02:00', 'Europe/London')).toBe('2026-03-29T01:00:00.000Z');
    // 2026-03-08 02:00 EST becomes 03:00 EDT (07:00 UTC).
    expect(zonedLocalToInstant('2026-03-08T02:15', 'America/New_York')).toBe('2026-03-08T07:00:00.000Z');
  });

  it('takes a time that happens twice at the fall-back change as the earlier instant', () => {
    // 2026-10-25 02:00 BST becomes 01:00 GMT; 01:30 happens at 00:30 UTC and again at 01:30 UTC.
    expect(zonedLocalToInstant('2026-10-25T01:30', 'Europe/London')).toBe('2026-10-25T00:30:00.000Z');
    expect(zonedLocalToInstant('2026-10-25T02:00', 'Europe/London')).toBe('2026-10-25T02:00:00.000Z');
  });

  it('refuses text that is not a date and time, impossible dates and unknown zones', () => {
    expect(zonedLocalToInstant('', 'Europe/London')).toBeNull();
    expect(zonedLocalToInstant('2026-02-30T08:00', 'Europe/London')).toBeNull();
    expect(zonedLocalToInstant('2026-01-15T24:00', 'Europe/London')).toBeNull();
    expect(zonedLocalToInstant('15/01/2026 08:00', 'Europe/London')).toBeNull();
    expect(zonedLocalToInstant('2026-01-15T08:00', 'Europe/Atlantis')).toBeNull();
  });

  it('round-trips with instantToZonedLocal', () => {
    const iso = zonedLocalToInstant('2026-11-02T06:45', 'Australia/Sydney')!;
    expect(instantToZonedLocal(iso, 'Australia/Sydney')).toBe('2026-11-02T06:45');
  });
});

describe('showing times', () => {
  it('formats a time as read in the rota zone, with the zone abbreviation', () => {
    expect(formatInZone('2026-03-09T08:00:00Z', 'Europe/London', 'en-GB')).toBe('Mon 9 Mar, 08:00 GMT');
    expect(formatInZone(null, 'Europe/London')).toBe('—');
  });

  it('adds the viewer time only when the viewer clock reads differently', () => {
    expect(inRotaAndViewerZone('2026-03-09T08:00:00Z', 'Europe/London', 'Europe/Lisbon', 'en-GB')).toEqual({
      rota: 'Mon 9 Mar, 08:00 GMT',
      viewer: null,
    });
    const both = inRotaAndViewerZone('2026-03-09T08:00:00Z', 'Europe/London', 'America/New_York', 'en-GB');
    expect(both.rota).toBe('Mon 9 Mar, 08:00 GMT');
    expect(both.viewer).toMatch(/^Mon 9 Mar, 04:00 (GMT-4|EDT)$/);
  });

  it('labels the offset and lists the known zones, keeping a rota zone in the list', () => {
    expect(offsetLabel('Europe/London', Date.parse('2026-07-01T00:00:00Z'))).toBe('UTC+01:00');
    expect(offsetLabel('America/St_Johns', Date.parse('2026-01-01T00:00:00Z'))).toBe('UTC−03:30');
    expect(offsetLabel('UTC')).toBe('UTC±00:00');
    expect(isTimeZone('Europe/London')).toBe(true);
    expect(isTimeZone('Mars/Olympus')).toBe(false);
    const names = timeZoneNames(['Europe/London']);
    expect(names).toContain('Europe/London');
    expect(names).toContain('UTC');
    expect([...names].sort()).toEqual(names);
  });
});
