import fc from 'fast-check';
import {
  handoffChain,
  nextHandovers,
  onWatchAt,
  validateWatchRota,
  WatchRotaError,
  type WatchRota,
} from '../src/rota/watch-rota';

// Outside reference for every instant below: the IANA tz database (release 2025c in
// this Node's ICU). The 2026 transition instants were written from memory and are
// checked first, through Node's Intl (ICU), independently of luxon:
//   EU (Europe/London): summer time from 29 March 2026 01:00 UTC, ends 25 October 2026 01:00 UTC.
//   US (America/New_York): 8 March 2026 07:00 UTC (02:00 EST), 1 November 2026 06:00 UTC (02:00 EDT).
const Z = (iso: string) => Date.parse(iso);

function wall(zone: string, ms: number): string {
  const parts = new Intl.DateTimeFormat('en-GB', {
    timeZone: zone,
    weekday: 'short',
    year: 'numeric',
    month: '2-digit',
    day: '2-digit',
    hour: '2-digit',
    minute: '2-digit',
    hourCycle: 'h23',
    timeZoneName: 'shortOffset',
  }).formatToParts(ms);
  const p = (t: string) => parts.find((x) => x.type === t)!.value;
  return `${p('weekday')} ${p('year')}-${p('month')}-${p('day')} ${p('hour')}:${p('minute')} ${p('timeZoneName').replace(/^GMT$/, 'GMT+0')}`;
}

const A = 1;
const B = 2;
const C = 3;
const D = 4;

// London: Monday 09:00 A, Friday 18:00 B, Sunday 01:30 C (01:30 falls in the March gap and the October overlap).
const london: WatchRota = {
  id: 1,
  name: 'Saltmarsh yard',
  scope: { kind: 'site', siteId: 1 },
  timeZone: 'Europe/London',
  shifts: [
    { weekday: 5, handover: '18:00', userId: B },
    { weekday: 1, handover: '09:00', userId: A },
    { weekday: 7, handover: '01:30', userId: C },
  ],
  backups: [D, A, B],
  overrides: [],
};

// New York: Monday 08:00 A, Sunday 01:30 B (overlap in November), Sunday 02:30 C (gap in March).
const newYork: WatchRota = {
  id: 2,
  name: 'Fleet, Americas',
  scope: { kind: 'fleet' },
  timeZone: 'America/New_York',
  shifts: [
    { weekday: 1, handover: '08:00', userId: A },
    { weekday: 7, handover: '01:30', userId: B },
    { weekday: 7, handover: '02:30', userId: C },
  ],
  backups: [],
  overrides: [],
};

/** One ms before `at` the previous person is on watch, at `at` the new one. */
function expectHandover(rota: WatchRota, at: number, before: number, after: number) {
  expect(onWatchAt(rota, at - 1).userId).toBe(before);
  expect(onWatchAt(rota, at).userId).toBe(after);
  expect(onWatchAt(rota, at).shiftStartMs).toBe(at);
  expect(onWatchAt(rota, at - 1).shiftEndMs).toBe(at);
}

describe('tz facts the rota tests rely on (IANA tz database via Node Intl/ICU)', () => {
  it('Europe/London changes at 01:00 UTC on 29 March and 25 October 2026 (from memory, verified here)', () => {
    expect(wall('Europe/London', Z('2026-03-29T00:59:59.999Z'))).toBe('Sun 2026-03-29 00:59 GMT+0');
    expect(wall('Europe/London', Z('2026-03-29T01:00:00Z'))).toBe('Sun 2026-03-29 02:00 GMT+1');
    expect(wall('Europe/London', Z('2026-10-25T00:59:59.999Z'))).toBe('Sun 2026-10-25 01:59 GMT+1');
    expect(wall('Europe/London', Z('2026-10-25T01:00:00Z'))).toBe('Sun 2026-10-25 01:00 GMT+0');
  });

  it('America/New_York changes at 02:00 local on 8 March and 1 November 2026 (from memory, verified here)', () => {
    expect(wall('America/New_York', Z('2026-03-08T06:59:59.999Z'))).toBe('Sun 2026-03-08 01:59 GMT-5');
    expect(wall('America/New_York', Z('2026-03-08T07:00:00Z'))).toBe('Sun 2026-03-08 03:00 GMT-4');
    expect(wall('America/New_York', Z('2026-11-01T05:59:59.999Z'))).toBe('Sun 2026-11-01 01:59 GMT-4');
    expect(wall('America/New_York', Z('2026-11-01T06:00:00Z'))).toBe('Sun 2026-11-01 01:00 GMT-5');
  });
});

describe('validateWatchRota', () => {
  it('accepts the test rotas', () => {
    expect(validateWatchRota(london)).toEqual({ ok: true });
    expect(validateWatchRota(newYork)).toEqual({ ok: true });
  });

  it('lists every problem with its path', () => {
    const bad: WatchRota = {
      ...london,
      name: ' ',
      timeZone: 'Europe/Saltmarsh',
      shifts: [
        { weekday: 1, handover: '24:00', userId: A },
        { weekday: 8 as never, handover: '09:00', userId: B },
        { weekday: 2, handover: '9:00', userId: 0 },
        { weekday: 3, handover: '07:15', userId: C },
        { weekday: 3, handover: '07:15', userId: D },
      ],
      backups: [D, D],
      overrides: [{ fromMs: 10, toMs: 10, userId: A, createdAtMs: 0 }],
    };
    const v = validateWatchRota(bad);
    expect(v.ok).toBe(false);
    if (v.ok) return;
    expect(v.issues.map((i) => `${i.code} ${i.path}`)).toEqual([
      'empty_name name',
      'unknown_zone timeZone',
      'bad_time shifts[0].handover',
      'bad_weekday shifts[1].weekday',
      'bad_time shifts[2].handover',
      'bad_user shifts[2].userId',
      'duplicate_handover shifts[4].handover',
      'duplicate_backup backups[1]',
      'bad_override_range overrides[0]',
    ]);
  });

  it('wants at least one shift; overlapping overrides are fine', () => {
    const v = validateWatchRota({ ...london, shifts: [] });
    expect(v).toEqual({ ok: false, issues: [expect.objectContaining({ code: 'no_shifts', path: 'shifts' })] });
    const overlapping = {
      ...london,
      overrides: [
        { fromMs: 0, toMs: 100, userId: A, createdAtMs: 1 },
        { fromMs: 50, toMs: 150, userId: B, createdAtMs: 2 },
      ],
    };
    expect(validateWatchRota(overlapping)).toEqual({ ok: true });
  });

  it('the lookups refuse an invalid rota with the same issues', () => {
    expect(() => onWatchAt({ ...london, timeZone: 'Mars/Olympus' }, 0)).toThrow(WatchRotaError);
    expect(() => onWatchAt({ ...london, timeZone: 'Mars/Olympus' }, 0)).toThrow(/timeZone/);
  });
});

describe('handover at the boundary, Europe/London', () => {
  it('in winter (GMT) Monday 09:00 local is 09:00 UTC', () => {
    const at = Z('2026-01-05T09:00:00Z');
    expect(wall('Europe/London', at)).toBe('Mon 2026-01-05 09:00 GMT+0');
    expectHandover(london, at, C, A);
  });

  it('in summer (BST) Monday 09:00 local is 08:00 UTC', () => {
    const at = Z('2026-06-01T08:00:00Z');
    expect(wall('Europe/London', at)).toBe('Mon 2026-06-01 09:00 GMT+1');
    expectHandover(london, at, C, A);
  });

  it('spring forward: Sunday 01:30 does not exist on 29 March 2026, so C takes over at the first instant after the gap', () => {
    const friday = Z('2026-03-27T18:00:00Z'); // Friday 18:00 GMT
    const gapEnd = Z('2026-03-29T01:00:00Z'); // 00:59:59.999 GMT is followed by 02:00 BST
    const monday = Z('2026-03-30T08:00:00Z'); // Monday 09:00 BST
    expectHandover(london, friday, A, B);
    expectHandover(london, gapEnd, B, C);
    expectHandover(london, monday, C, A);
    expect(onWatchAt(london, Z('2026-03-29T12:00:00Z'))).toEqual({ userId: C, source: 'weekly', shiftStartMs: gapEnd, shiftEndMs: monday });
    expect(nextHandovers(london, friday - 1, 3)).toEqual([
      { atMs: friday, userId: B, previousUserId: A, source: 'weekly' },
      { atMs: gapEnd, userId: C, previousUserId: B, source: 'weekly' },
      { atMs: monday, userId: A, previousUserId: C, source: 'weekly' },
    ]);
  });

  it('fall back: Sunday 01:30 happens twice on 25 October 2026, and C takes over at the earlier one (BST)', () => {
    const first = Z('2026-10-25T00:30:00Z');
    const second = Z('2026-10-25T01:30:00Z');
    expect(wall('Europe/London', first)).toBe('Sun 2026-10-25 01:30 GMT+1');
    expect(wall('Europe/London', second)).toBe('Sun 2026-10-25 01:30 GMT+0');
    expectHandover(london, first, B, C);
    expect(onWatchAt(london, second).userId).toBe(C);
    // Monday after the change: 09:00 GMT = 09:00 UTC; the week before: 09:00 BST = 08:00 UTC.
    expectHandover(london, Z('2026-10-26T09:00:00Z'), C, A);
    expectHandover(london, Z('2026-10-19T08:00:00Z'), C, A);
  });
});

describe('two handovers in one gap', () => {
  it('land on the same instant; the later one in the week wins and the earlier lasts no time', () => {
    const rota: WatchRota = {
      ...london,
      shifts: [
        { weekday: 1, handover: '09:00', userId: A },
        { weekday: 7, handover: '01:00', userId: B },
        { weekday: 7, handover: '01:30', userId: C },
      ],
    };
    const gapEnd = Z('2026-03-29T01:00:00Z'); // both 01:00 and 01:30 local fall in the gap
    expectHandover(rota, gapEnd, A, C);
    expect(nextHandovers(rota, gapEnd - 1, 1)).toEqual([{ atMs: gapEnd, userId: C, previousUserId: A, source: 'weekly' }]);
    // A week earlier both exist: B from 01:00 GMT, C from 01:30 GMT.
    expectHandover(rota, Z('2026-03-22T01:00:00Z'), A, B);
    expectHandover(rota, Z('2026-03-22T01:30:00Z'), B, C);
  });
});

describe('handover at the boundary, America/New_York', () => {
  it('Monday 08:00 local is 13:00 UTC in EST and 12:00 UTC in EDT', () => {
    expect(wall('America/New_York', Z('2026-03-02T13:00:00Z'))).toBe('Mon 2026-03-02 08:00 GMT-5');
    expectHandover(newYork, Z('2026-03-02T13:00:00Z'), C, A);
    expect(wall('America/New_York', Z('2026-03-09T12:00:00Z'))).toBe('Mon 2026-03-09 08:00 GMT-4');
    expectHandover(newYork, Z('2026-03-09T12:00:00Z'), C, A);
  });

  it('spring forward, 8 March 2026: 01:30 EST exists, 02:30 falls in the gap and hands over at 03:00 EDT', () => {
    const b = Z('2026-03-08T06:30:00Z'); // 01:30 EST
    const c = Z('2026-03-08T07:00:00Z'); // 03:00 EDT, first instant after the gap
    expectHandover(newYork, b, A, B);
    expectHandover(newYork, c, B, C);
    expect(onWatchAt(newYork, c + 3_600_000)).toEqual({
      userId: C,
      source: 'weekly',
      shiftStartMs: c,
      shiftEndMs: Z('2026-03-09T12:00:00Z'),
    });
  });

  it('fall back, 1 November 2026: 01:30 is taken at its first (EDT) occurrence; 02:30 is EST', () => {
    const b = Z('2026-11-01T05:30:00Z'); // 01:30 EDT
    const c = Z('2026-11-01T07:30:00Z'); // 02:30 EST
    expect(wall('America/New_York', b)).toBe('Sun 2026-11-01 01:30 GMT-4');
    expect(wall('America/New_York', c)).toBe('Sun 2026-11-01 02:30 GMT-5');
    expectHandover(newYork, b, A, B);
    expect(onWatchAt(newYork, Z('2026-11-01T06:30:00Z')).userId).toBe(B); // the second 01:30, still B
    expectHandover(newYork, c, B, C);
    expect(nextHandovers(newYork, Z('2026-11-01T00:00:00Z'), 3).map((h) => [h.atMs, h.userId])).toEqual([
      [b, B],
      [c, C],
      [Z('2026-11-02T13:00:00Z'), A], // Monday 08:00 EST
    ]);
  });
});

describe('overrides', () => {
  // Week of Monday 2026-01-05 (GMT, so local = UTC): A from Mon 09:00, B from Fri 18:00.
  const swap = Z('2026-01-07T12:00:00Z');
  const late = Z('2026-01-07T18:00:00Z');
  const lateEnd = Z('2026-01-07T20:00:00Z');
  const swapEnd = Z('2026-01-08T12:00:00Z');
  const rota: WatchRota = {
    ...london,
    overrides: [
      // Listed first but created last: wins where it overlaps the second.
      { fromMs: late, toMs: lateEnd, userId: C, note: 'covering the evening', createdAtMs: 300 },
      { fromMs: swap, toMs: swapEnd, userId: D, note: 'shift swap', createdAtMs: 200 },
      // Created before the swap and wholly inside it: never in force.
      { fromMs: Z('2026-01-07T13:00:00Z'), toMs: Z('2026-01-07T14:00:00Z'), userId: B, createdAtMs: 100 },
    ],
  };

  it('win over the weekly schedule, the last created winning where they overlap', () => {
    expect(onWatchAt(rota, swap - 1)).toMatchObject({ userId: A, source: 'weekly' });
    expect(onWatchAt(rota, swap)).toEqual({ userId: D, source: 'override', shiftStartMs: swap, shiftEndMs: late });
    expect(onWatchAt(rota, Z('2026-01-07T13:30:00Z')).userId).toBe(D);
    expect(onWatchAt(rota, late)).toEqual({ userId: C, source: 'override', shiftStartMs: late, shiftEndMs: lateEnd });
    expect(onWatchAt(rota, lateEnd)).toEqual({ userId: D, source: 'override', shiftStartMs: lateEnd, shiftEndMs: swapEnd });
    expect(onWatchAt(rota, swapEnd)).toMatchObject({ userId: A, source: 'weekly', shiftStartMs: swapEnd });
  });

  it('appear among the next handovers', () => {
    expect(nextHandovers(rota, Z('2026-01-07T00:00:00Z'), 5)).toEqual([
      { atMs: swap, userId: D, previousUserId: A, source: 'override' },
      { atMs: late, userId: C, previousUserId: D, source: 'override' },
      { atMs: lateEnd, userId: D, previousUserId: C, source: 'override' },
      { atMs: swapEnd, userId: A, previousUserId: D, source: 'weekly' },
      { atMs: Z('2026-01-09T18:00:00Z'), userId: B, previousUserId: A, source: 'weekly' },
    ]);
  });

  it('for the person already on watch are no handover: the watch runs on', () => {
    const same: WatchRota = { ...london, overrides: [{ fromMs: Z('2026-01-09T17:00:00Z'), toMs: Z('2026-01-09T20:00:00Z'), userId: A, createdAtMs: 1 }] };
    // A extends into Friday evening; B takes over when the override ends.
    expect(onWatchAt(same, Z('2026-01-06T00:00:00Z'))).toEqual({
      userId: A,
      source: 'weekly',
      shiftStartMs: Z('2026-01-05T09:00:00Z'),
      shiftEndMs: Z('2026-01-09T20:00:00Z'),
    });
    expect(nextHandovers(same, Z('2026-01-06T00:00:00Z'), 1)).toEqual([
      { atMs: Z('2026-01-09T20:00:00Z'), userId: B, previousUserId: A, source: 'weekly' },
    ]);
  });

  it('one person on every shift: a watch without end, handovers only around overrides', () => {
    const solo: WatchRota = { ...london, shifts: [{ weekday: 3, handover: '10:00', userId: A }], overrides: [] };
    expect(onWatchAt(solo, Z('2026-05-01T00:00:00Z'))).toEqual({ userId: A, source: 'weekly', shiftStartMs: null, shiftEndMs: null });
    expect(nextHandovers(solo, 0, 3)).toEqual([]);
    const cover = { ...solo, overrides: [{ fromMs: Z('2026-05-02T00:00:00Z'), toMs: Z('2026-05-03T00:00:00Z'), userId: B, createdAtMs: 0 }] };
    expect(nextHandovers(cover, Z('2026-05-01T00:00:00Z'), 3).map((h) => h.userId)).toEqual([B, A]);
    expect(onWatchAt(cover, Z('2026-05-01T00:00:00Z'))).toEqual({ userId: A, source: 'weekly', shiftStartMs: null, shiftEndMs: Z('2026-05-02T00:00:00Z') });
  });
});

describe('handoffChain', () => {
  it('is the person on watch, then the backups in order, each once', () => {
    // Monday 2026-01-05 10:00 GMT: A on watch; backups D, A, B.
    expect(handoffChain(london, Z('2026-01-05T10:00:00Z'))).toEqual([A, D, B]);
    // Saturday: B on watch.
    expect(handoffChain(london, Z('2026-01-10T10:00:00Z'))).toEqual([B, D, A]);
    expect(handoffChain({ ...london, backups: [] }, Z('2026-01-10T10:00:00Z'))).toEqual([B]);
  });
});

describe('consistency between onWatchAt and nextHandovers (property)', () => {
  it('the watch ends exactly at the next handover, and the person changes there', () => {
    const from = Z('2026-01-01T00:00:00Z');
    const to = Z('2027-01-01T00:00:00Z');
    fc.assert(
      fc.property(fc.constantFrom(london, newYork), fc.integer({ min: from, max: to }), (rota, t) => {
        const now = onWatchAt(rota, t);
        const [next] = nextHandovers(rota, t, 1);
        expect(now.shiftEndMs).toBe(next.atMs);
        expect(now.shiftStartMs!).toBeLessThanOrEqual(t);
        expect(onWatchAt(rota, next.atMs - 1).userId).toBe(now.userId);
        expect(onWatchAt(rota, next.atMs).userId).toBe(next.userId);
        expect(onWatchAt(rota, now.shiftStartMs! - 1).userId).not.toBe(now.userId);
      }),
      { numRuns: 100 },
    );
  });
});
