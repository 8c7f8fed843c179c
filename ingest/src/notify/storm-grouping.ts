// Storm control for notifications: when many alerts fire at once (a site loses
// power, a rollout goes wrong), each person gets one message now and one summary
// per window, not one message per alert. Pure: time comes in as arguments.
//
// Per recipient:
// - Quiet (nothing sent in the current window): a notification goes out alone at
//   once and opens a window [now, now + windowMs).
// - Inside a window: notifications are held. When the window ends, the held ones go
//   out as ONE grouped message (a single held notification goes out as a single
//   message, late), and a new window opens at that end, so a storm that goes on
//   yields one summary per window. A window that ends with nothing held makes the
//   recipient quiet again.
// - The same alert added again for one recipient within a window (including the
//   one sent alone when the window opened) is not held again.
import type { AlertSeverity } from '../../../shared/src/api/api-types';

export interface PendingNotification {
  recipientUserId: number;
  alertId: number;
  severity: AlertSeverity;
  rule: string;
  unitKey: string;
  estimatorKey: string;
  siteName: string;
  /** The design revision the estimator runs, e.g. "tractor-planar r4"; null when unknown. */
  designRevision: string | null;
  summary: string;
  openedAtMs: number;
}

export interface GroupCount<K> {
  key: K;
  count: number;
}

export interface StormSummary {
  count: number;
  /** Most severe first (critical, warning, info); only severities present. */
  bySeverity: GroupCount<AlertSeverity>[];
  /** Largest group first, then by name. */
  bySite: GroupCount<string>[];
  /** Largest group first, then by name; null = no known design revision. */
  byDesignRevision: GroupCount<string | null>[];
  /** Up to `listLimit` alerts, most severe first, then oldest first. */
  alerts: PendingNotification[];
  /** How many alerts the list leaves out ("and N more"). */
  more: number;
}

export type NotificationMessage =
  | { kind: 'single'; recipientUserId: number; sendAtMs: number; notification: PendingNotification }
  | { kind: 'grouped'; recipientUserId: number; sendAtMs: number; windowStartMs: number; windowEndMs: number; summary: StormSummary };

export interface StormGrouperOptions {
  /** Grouping window, ms (default 3 minutes). */
  windowMs?: number;
  /** Alerts listed in a grouped message (default 50). */
  listLimit?: number;
}

export const DEFAULT_STORM_WINDOW_MS = 3 * 60_000;
export const DEFAULT_STORM_LIST_LIMIT = 50;

const SEVERITY_RANK: Record<AlertSeverity, number> = { critical: 0, warning: 1, info: 2 };
const SEVERITIES: AlertSeverity[] = ['critical', 'warning', 'info'];

/** Most severe first, then oldest, then lowest alert id. */
function listOrder(a: PendingNotification, b: PendingNotification): number {
  return SEVERITY_RANK[a.severity] - SEVERITY_RANK[b.severity] || a.openedAtMs - b.openedAtMs || a.alertId - b.alertId;
}

/** The held notifications of one window: counts kept as they come, the list bounded. */
class HeldGroup {
  count = 0;
  private readonly alertIds = new Set<number>();
  private readonly severity = new Map<AlertSeverity, number>();
  private readonly site = new Map<string, number>();
  private readonly revision = new Map<string | null, number>();
  /** Sorted by listOrder, at most `limit` long. */
  private readonly listed: PendingNotification[] = [];

  constructor(
    readonly windowStartMs: number,
    readonly windowEndMs: number,
    private readonly limit: number,
    /** The alert sent alone when the window opened: not held again. */
    openedBy?: number,
  ) {
    if (openedBy !== undefined) this.alertIds.add(openedBy);
  }

  add(n: PendingNotification): void {
    if (this.alertIds.has(n.alertId)) return;
    this.alertIds.add(n.alertId);
    this.count++;
    bump(this.severity, n.severity);
    bump(this.site, n.siteName);
    bump(this.revision, n.designRevision);
    if (this.listed.length < this.limit || listOrder(n, this.listed[this.listed.length - 1]) < 0) {
      let lo = 0;
      let hi = this.listed.length;
      while (lo < hi) {
        const mid = (lo + hi) >> 1;
        if (listOrder(this.listed[mid], n) <= 0) lo = mid + 1;
        else hi = mid;
      }
      this.listed.splice(lo, 0, n);
      if (this.listed.length > this.limit) this.listed.pop();
    }
  }

  /** The only held notification, when there is exactly one. */
  only(): PendingNotification | undefined {
    return this.count === 1 ? this.listed[0] : undefined;
  }

  summary(): StormSummary {
    return {
      count: this.count,
      bySeverity: SEVERITIES.filter((s) => this.severity.has(s)).map((s) => ({ key: s, count: this.severity.get(s)! })),
      bySite: largestFirst(this.site),
      byDesignRevision: largestFirst(this.revision),
      alerts: [...this.listed],
      more: this.count - this.listed.length,
    };
  }
}

function bump<K>(m: Map<K, number>, k: K): void {
  m.set(k, (m.get(k) ?? 0) + 1);
}

function largestFirst<K extends string | null>(m: Map<K, number>): GroupCount<K>[] {
  return [...m]
    .map(([key, count]) => ({ key, count }))
    .sort((a, b) => b.count - a.count || (a.key ?? '\uffff').localeCompare(b.key ?? '\uffff'));
}

export class StormGrouper {
  readonly windowMs: number;
  readonly listLimit: number;
  /** Recipients inside a window, with what is held for them. */
  private readonly windows = new Map<number, HeldGroup>();
  /** Grouped (or late single) messages whose window ended, not yet collected by due(). */
  private readonly ready: NotificationMessage[] = [];

  constructor(options: StormGrouperOptions = {}) {
    this.windowMs = options.windowMs ?? DEFAULT_STORM_WINDOW_MS;
    this.listLimit = options.listLimit ?? DEFAULT_STORM_LIST_LIMIT;
    if (!(Number.isFinite(this.windowMs) && this.windowMs > 0)) throw new RangeError(`windowMs must be > 0, got ${this.windowMs}`);
    if (!(Number.isInteger(this.listLimit) && this.listLimit >= 1)) throw new RangeError(`listLimit must be a whole number ≥ 1, got ${this.listLimit}`);
  }

  /**
   * Takes a notification at `nowMs`. Returns what to send right away: the
   * notification itself when its recipient is quiet, else nothing (it is held).
   */
  add(n: PendingNotification, nowMs: number): NotificationMessage[] {
    this.close(n.recipientUserId, nowMs);
    const held = this.windows.get(n.recipientUserId);
    if (held) {
      held.add(n);
      return [];
    }
    this.windows.set(n.recipientUserId, new HeldGroup(nowMs, nowMs + this.windowMs, this.listLimit, n.alertId));
    return [{ kind: 'single', recipientUserId: n.recipientUserId, sendAtMs: nowMs, notification: n }];
  }

  /** The messages whose window has ended by `nowMs`, in the order their windows ended. */
  due(nowMs: number): NotificationMessage[] {
    for (const recipient of [...this.windows.keys()]) this.close(recipient, nowMs);
    return this.ready.splice(0).sort((a, b) => a.sendAtMs - b.sendAtMs || a.recipientUserId - b.recipientUserId);
  }

  /** When due() next has something (or a window to close), or null when every recipient is quiet. */
  nextDueMs(): number | null {
    let next: number | null = null;
    for (const w of this.windows.values()) if (next === null || w.windowEndMs < next) next = w.windowEndMs;
    return next;
  }

  /** Notifications held for the windows still open. */
  heldCount(): number {
    let n = 0;
    for (const w of this.windows.values()) n += w.count;
    return n;
  }

  /** Ends the recipient's windows that are over by nowMs (a storm that goes on rolls into the next window). */
  private close(recipient: number, nowMs: number): void {
    for (let w = this.windows.get(recipient); w && w.windowEndMs <= nowMs; w = this.windows.get(recipient)) {
      if (w.count === 0) {
        this.windows.delete(recipient);
        return;
      }
      const only = w.only();
      this.ready.push(
        only
          ? { kind: 'single', recipientUserId: recipient, sendAtMs: w.windowEndMs, notification: only }
          : { kind: 'grouped', recipientUserId: recipient, sendAtMs: w.windowEndMs, windowStartMs: w.windowStartMs, windowEndMs: w.windowEndMs, summary: w.summary() },
      );
      this.windows.set(recipient, new HeldGroup(w.windowEndMs, w.windowEndMs + this.windowMs, this.listLimit));
    }
  }
}
