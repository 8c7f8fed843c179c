import { DEFAULT_STORM_WINDOW_MS, StormGrouper, type NotificationMessage, type PendingNotification } from './storm-grouping';

const t0 = Date.parse('2026-01-01T03:00:00Z');
const ALICE = 11;
const BOB = 12;

/**
 * Alert i (0…199) opens at t0 + 300·i ms (all within 60 s):
 *   severity: i < 20 critical, 20…189 warning, 190…199 info
 *   site:     i < 150 "Quay North", else "Quay South"
 *   revision: i < 120 "tractor-planar r5", 120…179 "cabinet-thermal r2", 180…199 none
 */
function alert(i: number, recipientUserId: number): PendingNotification {
  return {
    recipientUserId,
    alertId: 1000 + i,
    severity: i < 20 ? 'critical' : i < 190 ? 'warning' : 'info',
    rule: 'nis-window',
    unitKey: `tractor-${String(i).padStart(3, '0')}`,
    estimatorKey: 'position',
    siteName: i < 150 ? 'Quay North' : 'Quay South',
    designRevision: i < 120 ? 'tractor-planar r5' : i < 180 ? 'cabinet-thermal r2' : null,
    summary: `NIS window above its band on tractor-${i}`,
    openedAtMs: t0 + 300 * i,
  };
}

describe('StormGrouper', () => {
  it('turns 200 alerts within a minute for 2 recipients into 1 immediate + 1 grouped message each', () => {
    const g = new StormGrouper();
    expect(g.windowMs).toBe(DEFAULT_STORM_WINDOW_MS);
    const immediate: NotificationMessage[] = [];
    for (let i = 0; i < 200; i++) {
      for (const r of [ALICE, BOB]) immediate.push(...g.add(alert(i, r), t0 + 300 * i));
    }
    expect(immediate).toEqual([
      { kind: 'single', recipientUserId: ALICE, sendAtMs: t0, notification: alert(0, ALICE) },
      { kind: 'single', recipientUserId: BOB, sendAtMs: t0, notification: alert(0, BOB) },
    ]);
    expect(g.heldCount()).toBe(2 * 199);
    expect(g.nextDueMs()).toBe(t0 + 180_000);
    expect(g.due(t0 + 179_999)).toEqual([]);

    const grouped = g.due(t0 + 180_000);
    expect(grouped.map((m) => [m.kind, m.recipientUserId])).toEqual([
      ['grouped', ALICE],
      ['grouped', BOB],
    ]);
    for (const m of grouped) {
      if (m.kind !== 'grouped') throw new Error('expected a grouped message');
      expect(m).toMatchObject({ sendAtMs: t0 + 180_000, windowStartMs: t0, windowEndMs: t0 + 180_000 });
      const s = m.summary;
      // Held: alerts 1…199 (alert 0 went out alone).
      expect(s.count).toBe(199);
      expect(s.bySeverity).toEqual([
        { key: 'critical', count: 19 },
        { key: 'warning', count: 170 },
        { key: 'info', count: 10 },
      ]);
      expect(s.bySite).toEqual([
        { key: 'Quay North', count: 149 },
        { key: 'Quay South', count: 50 },
      ]);
      expect(s.byDesignRevision).toEqual([
        { key: 'tractor-planar r5', count: 119 },
        { key: 'cabinet-thermal r2', count: 60 },
        { key: null, count: 20 },
      ]);
      // First 50, most severe then oldest: critical 1…19, then warning 20…50.
      expect(s.alerts.map((a) => a.alertId - 1000)).toEqual(Array.from({ length: 50 }, (_, k) => k + 1));
      expect(s.alerts.every((a) => a.recipientUserId === m.recipientUserId)).toBe(true);
      expect(s.more).toBe(149);
    }
    expect(g.due(t0 + 180_000)).toEqual([]);
    expect(g.heldCount()).toBe(0);
  });

  it('lists the most severe first even when they come last', () => {
    const g = new StormGrouper({ listLimit: 3 });
    const n = (alertId: number, severity: PendingNotification['severity'], at: number): PendingNotification => ({
      ...alert(0, ALICE),
      alertId,
      severity,
      openedAtMs: at,
    });
    g.add(n(1, 'info', t0), t0);
    for (let k = 2; k <= 6; k++) g.add(n(k, 'info', t0 + k), t0 + k);
    g.add(n(7, 'critical', t0 + 7), t0 + 7);
    g.add(n(8, 'warning', t0 + 8), t0 + 8);
    const [m] = g.due(t0 + DEFAULT_STORM_WINDOW_MS);
    if (m.kind !== 'grouped') throw new Error('expected a grouped message');
    expect(m.summary.alerts.map((a) => a.alertId)).toEqual([7, 8, 2]);
    expect(m.summary.count).toBe(7);
    expect(m.summary.more).toBe(4);
  });

  it('keeps grouping while the storm goes on, then goes quiet and sends the next one alone', () => {
    const g = new StormGrouper({ windowMs: 60_000 });
    expect(g.add(alert(0, ALICE), t0)).toHaveLength(1);
    g.add(alert(1, ALICE), t0 + 10_000);
    g.add(alert(2, ALICE), t0 + 20_000);
    // Window 1 ended; alert 3 comes in window 2 before anyone called due().
    expect(g.add(alert(3, ALICE), t0 + 70_000)).toEqual([]);
    g.add(alert(4, ALICE), t0 + 80_000);
    const out = g.due(t0 + 120_000);
    expect(out.map((m) => [m.kind, m.sendAtMs, m.kind === 'grouped' ? m.summary.count : 1])).toEqual([
      ['grouped', t0 + 60_000, 2],
      ['grouped', t0 + 120_000, 2],
    ]);
    // Window 3 (t0+120 s … t0+180 s) holds nothing: quiet again afterwards.
    expect(g.due(t0 + 180_000)).toEqual([]);
    expect(g.nextDueMs()).toBeNull();
    expect(g.add(alert(5, ALICE), t0 + 190_000)).toEqual([
      { kind: 'single', recipientUserId: ALICE, sendAtMs: t0 + 190_000, notification: alert(5, ALICE) },
    ]);
  });

  it('sends a lone held notification on its own when the window ends, and holds an alert once', () => {
    const g = new StormGrouper();
    g.add(alert(0, BOB), t0);
    g.add(alert(0, BOB), t0 + 1); // already sent alone: not held again
    g.add(alert(1, BOB), t0 + 2);
    g.add(alert(1, BOB), t0 + 3);
    expect(g.heldCount()).toBe(1);
    expect(g.due(t0 + DEFAULT_STORM_WINDOW_MS)).toEqual([
      { kind: 'single', recipientUserId: BOB, sendAtMs: t0 + DEFAULT_STORM_WINDOW_MS, notification: alert(1, BOB) },
    ]);
  });

  it('keeps recipients apart', () => {
    const g = new StormGrouper();
    expect(g.add(alert(0, ALICE), t0)).toHaveLength(1);
    expect(g.add(alert(1, BOB), t0 + 1)).toHaveLength(1);
    expect(g.add(alert(2, ALICE), t0 + 2)).toEqual([]);
  });

  it('refuses a window or list limit that makes no sense', () => {
    expect(() => new StormGrouper({ windowMs: 0 })).toThrow(RangeError);
    expect(() => new StormGrouper({ listLimit: 0 })).toThrow(RangeError);
  });
});
