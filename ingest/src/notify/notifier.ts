// Gets the right person out of bed. Listens to the alerts the pipeline and the people
// raise and change, and turns them into deliveries in the outbox:
// - a new alert pages whoever is on watch for its site (the site's rota, else the
//   fleet's), if its severity pages and it is not in that severity's quiet hours;
// - not acknowledged within the rule's handoff time, it goes to the next person in
//   line, then to the whole response team (responders and admins); each step is
//   written to the alert's trail;
// - pages and handoffs to one person go through storm control: the first alone, the
//   rest of a window as one grouped message;
// - acknowledgement stops the handoffs; resolution tells whoever was paged;
// - every alert event goes to each active webhook endpoint.
import { randomBytes } from 'node:crypto';
import { DateTime } from 'luxon';
import type { AlertSeverity, NotificationRule } from '../../../shared/src/api/api-types';
import { handoffChain, type WatchRota } from '../../../shared/src/rota/watch-rota';
import type { Clock } from '../clock';
import type { AlertEvent, ServiceEvents } from '../events';
import type { Logger } from '../logger';
import { groupedMail, handoffMail, pageMail, resolutionMail, resolvedGroupMail, type MailAlert, type MailContent } from './mail-templates';
import type { AlertFacts, NewDelivery, NotifyRepository, Person } from './notify-repository';
import { issueAckToken } from './signing';
import { StormGrouper, type NotificationMessage, type PendingNotification } from './storm-grouping';

export interface NotifierSettings {
  /** Where the dashboard lives, for links in messages. */
  baseUrl: string;
  linkSecret: string;
  ackLinkTtlMs: number;
  stormWindowMs: number;
}

type MailKind = 'page' | 'handoff';

interface Held extends PendingNotification {
  kind: MailKind;
  /** For a handoff: who had it before. */
  notAcknowledgedBy?: string[];
  waitedMs?: number;
}

/** Is the local time of `atMs` in the rota's zone inside [from, to) (wrapping past midnight)? */
export function inQuietHours(rule: Pick<NotificationRule, 'quietFrom' | 'quietTo'>, timeZone: string, atMs: number): boolean {
  if (!rule.quietFrom || !rule.quietTo) return false;
  const local = DateTime.fromMillis(atMs, { zone: timeZone });
  const minute = local.hour * 60 + local.minute;
  const toMin = (hhmm: string) => Number(hhmm.slice(0, 2)) * 60 + Number(hhmm.slice(3, 5));
  const from = toMin(rule.quietFrom);
  const to = toMin(rule.quietTo);
  if (from === to) return false;
  return from < to ? minute >= from && minute < to : minute >= from || minute < to;
}

export class Notifier {
  private readonly pages: StormGrouper;
  private readonly resolutions: StormGrouper;
  private chain: Promise<void> = Promise.resolve();
  private readonly onAlert = (e: AlertEvent) => {
    this.chain = this.chain.then(() => this.handle(e)).catch((err: Error) => this.deps.logger.error({ err: err.message, event: e.kind }, 'notification failed'));
  };

  constructor(
    private readonly deps: { repo: NotifyRepository; events: ServiceEvents; clock: Clock; logger: Logger },
    private readonly settings: NotifierSettings,
  ) {
    this.pages = new StormGrouper({ windowMs: settings.stormWindowMs });
    this.resolutions = new StormGrouper({ windowMs: settings.stormWindowMs });
  }

  start(): void {
    this.deps.events.on('alert', this.onAlert);
  }

  /** Stops listening and sends what storm control still holds. */
  async stop(): Promise<void> {
    this.deps.events.off('alert', this.onAlert);
    await this.chain;
    await this.flushGroups(Number.POSITIVE_INFINITY);
  }

  /** Resolves once every event received so far has been turned into deliveries. */
  idle(): Promise<void> {
    return this.chain;
  }

  /** Periodic: handoffs that are due, and grouped messages whose window ended. */
  async sweep(): Promise<void> {
    await this.chain;
    const now = this.deps.clock.now();
    for (const due of await this.deps.repo.takeDueHandoffs(now)) {
      const facts = await this.deps.repo.alertFacts(due.alertId);
      if (!facts) continue;
      const people = await this.deps.repo.people();
      const name = (id: number) => people.get(id)?.displayName ?? `user ${id}`;
      const before = due.chain.slice(0, Math.min(due.step, due.chain.length)).map(name);
      let to: Person[];
      let note: string;
      if (due.step < due.chain.length) {
        const next = people.get(due.chain[due.step]);
        to = next && next.active ? [next] : [];
        note = `not acknowledged within ${duration(due.handoffAfterMs)}: handed to ${name(due.chain[due.step])}`;
      } else {
        to = [...people.values()].filter((p) => p.active && (p.role === 'responder' || p.role === 'admin'));
        note = `not acknowledged within ${duration(due.handoffAfterMs)} by anyone in line: handed to the whole response team (${to.map((p) => p.displayName).join(', ')})`;
      }
      await this.deps.repo.addAlertEvent(due.alertId, 'handoff', note, { step: due.step, to: to.map((p) => p.id) });
      for (const p of to) {
        await this.offer(p, facts, { kind: 'handoff', notAcknowledgedBy: before, waitedMs: due.handoffAfterMs }, now);
      }
    }
    await this.flushGroups(now);
  }

  private async handle(e: AlertEvent): Promise<void> {
    const alertId = e.alertId ?? (await this.deps.repo.liveAlertId(e.estimatorId, e.unitId, e.rule));
    if (alertId === null) return;
    const facts = await this.deps.repo.alertFacts(alertId);
    if (!facts) return;
    const now = this.deps.clock.now();
    const type = e.kind === 'open' ? 'alert.opened' : e.kind === 'clear' ? 'alert.cleared' : `alert.${e.kind}`;
    await this.webhooks(type, facts, e.actor ?? null, now);
    if (e.kind === 'open') await this.page(facts, now);
    else if (e.kind === 'acknowledged') await this.deps.repo.stopPaging(alertId);
    else if (e.kind === 'resolved' || e.kind === 'clear') await this.resolved(facts, e.kind === 'resolved' ? (e.actor ?? null) : null, now);
  }

  private async page(facts: AlertFacts, now: number): Promise<void> {
    const rules = await this.deps.repo.rules();
    const rule = rules.find((r) => r.severity === facts.severity);
    if (!rule || !rule.pages) {
      await this.deps.repo.addAlertEvent(facts.id, 'not-paged', `${facts.severity} alerts do not page (shown on the dashboard)`, null);
      return;
    }
    const rota = await this.deps.repo.rotaForSite(facts.siteId);
    if (!rota) {
      await this.deps.repo.addAlertEvent(facts.id, 'not-paged', 'no watch rota covers this site', null);
      return;
    }
    if (inQuietHours(rule, rota.timeZone, now)) {
      await this.deps.repo.addAlertEvent(facts.id, 'not-paged', `quiet hours for ${facts.severity} alerts (${rule.quietFrom}–${rule.quietTo} ${rota.timeZone})`, null);
      return;
    }
    const chain = safeChain(rota, now);
    const people = await this.deps.repo.people(chain);
    const first = chain.map((id) => people.get(id)).find((p) => p?.active);
    if (!first) {
      await this.deps.repo.addAlertEvent(facts.id, 'not-paged', `nobody active on ${rota.name}`, null);
      return;
    }
    const started = await this.deps.repo.startPaging({ alertId: facts.id, rotaId: rota.id, chain, handoffAfterMs: Math.round(rule.handoffAfterMinutes * 60_000), nowMs: now });
    if (!started) return; // paged already (the pipeline announces a live alert again after a restart)
    await this.deps.repo.addAlertEvent(facts.id, 'paged', `paged ${first.displayName} (on watch, ${rota.name})`, { step: 0, to: [first.id], rotaId: rota.id });
    await this.offer(first, facts, { kind: 'page' }, now);
  }

  private async resolved(facts: AlertFacts, by: string | null, now: number): Promise<void> {
    const paging = await this.deps.repo.paging(facts.id);
    if (!paging) return;
    await this.deps.repo.stopPaging(facts.id);
    const people = await this.deps.repo.people();
    const told = new Set(paging.chain.slice(0, Math.min(paging.step + 1, paging.chain.length)));
    if (paging.step >= paging.chain.length) for (const p of people.values()) if (p.role === 'responder' || p.role === 'admin') told.add(p.id);
    for (const id of told) {
      const person = people.get(id);
      if (!person?.active) continue;
      const out = this.resolutions.add({ ...pending(facts, id), summary: facts.summary }, now);
      for (const m of out) await this.sendResolution(m, person, facts, by, now);
    }
  }

  /** A page or handoff for one person, through storm control. */
  private async offer(person: Person, facts: AlertFacts, how: { kind: MailKind; notAcknowledgedBy?: string[]; waitedMs?: number }, now: number): Promise<void> {
    const held: Held = { ...pending(facts, person.id), ...how };
    for (const m of this.pages.add(held, now)) await this.sendPage(m, now);
  }

  private async flushGroups(now: number): Promise<void> {
    for (const m of this.pages.due(now)) await this.sendPage(m, now);
    const people = await this.deps.repo.people();
    for (const m of this.resolutions.due(now)) {
      const person = people.get(m.recipientUserId);
      if (!person) continue;
      const facts = m.kind === 'single' ? await this.deps.repo.alertFacts(m.notification.alertId) : null;
      await this.sendResolution(m, person, facts, null, now);
    }
  }

  private async sendPage(m: NotificationMessage, now: number): Promise<void> {
    const person = (await this.deps.repo.people([m.recipientUserId])).get(m.recipientUserId);
    if (!person) return;
    const ctx = { baseUrl: this.settings.baseUrl, timeZone: 'UTC' };
    let content: MailContent;
    let alertIds: number[];
    if (m.kind === 'single') {
      const n = m.notification as Held;
      const facts = await this.deps.repo.alertFacts(n.alertId);
      if (!facts) return;
      const ack = await this.ackLink(facts.id, person.id, now);
      content =
        n.kind === 'handoff'
          ? handoffMail(ctx, mailAlert(facts), { notAcknowledgedBy: n.notAcknowledgedBy ?? [], waitedMs: n.waitedMs ?? 0, ack })
          : pageMail(ctx, mailAlert(facts), ack);
      alertIds = [facts.id];
    } else {
      content = groupedMail(ctx, m.summary, m);
      alertIds = m.summary.alerts.map((a) => a.alertId);
    }
    await this.deps.repo.enqueue([email(person, content, alertIds)]);
  }

  private async sendResolution(m: NotificationMessage, person: Person, facts: AlertFacts | null, by: string | null, now: number): Promise<void> {
    const ctx = { baseUrl: this.settings.baseUrl, timeZone: 'UTC' };
    if (m.kind === 'single') {
      if (!facts) return;
      const content = resolutionMail(ctx, mailAlert(facts), { resolvedBy: by, resolvedAtMs: now });
      await this.deps.repo.enqueue([email(person, content, [facts.id])]);
    } else {
      const content = resolvedGroupMail(ctx, m.summary, m);
      await this.deps.repo.enqueue([email(person, content, m.summary.alerts.map((a) => a.alertId))]);
    }
  }

  private async ackLink(alertId: number, userId: number, now: number): Promise<{ url: string; expiresAtMs: number }> {
    const nonce = randomBytes(18).toString('base64url');
    const expiresAtMs = now + this.settings.ackLinkTtlMs;
    await this.deps.repo.saveAckLink({ nonce, alertId, userId, expiresAtMs });
    const token = issueAckToken(this.settings.linkSecret, { alertId, userId, expiresAtMs, nonce });
    return { url: `${this.settings.baseUrl.replace(/\/+$/, '')}/ack/${token}`, expiresAtMs };
  }

  private async webhooks(type: string, facts: AlertFacts, actor: string | null, now: number): Promise<void> {
    const endpoints = await this.deps.repo.webhooks(true);
    if (endpoints.length === 0) return;
    const body = JSON.stringify({
      type,
      occurredAt: new Date(now).toISOString(),
      actor,
      alert: {
        id: facts.id,
        rule: facts.rule,
        severity: facts.severity,
        state: facts.state,
        summary: facts.summary,
        evidence: facts.evidence,
        unit: facts.unitKey,
        estimator: facts.estimatorKey,
        site: facts.siteName,
        designRevision: facts.designRevision,
        openedAt: new Date(facts.openedAtMs).toISOString(),
        url: `${this.settings.baseUrl.replace(/\/+$/, '')}/alerts/${facts.id}`,
      },
    });
    const list: NewDelivery[] = endpoints.map((ep) => ({ channel: 'webhook', target: ep.url, endpointId: ep.id, subject: type, content: { body }, alertIds: [facts.id] }));
    await this.deps.repo.enqueue(list);
  }
}

function duration(ms: number): string {
  return ms >= 60_000 ? `${Math.round(ms / 60_000)} min` : `${Math.round(ms / 1000)} s`;
}

function safeChain(rota: WatchRota, now: number): number[] {
  try {
    return handoffChain(rota, now);
  } catch {
    return rota.backups.slice();
  }
}

/** What a message says about an alert, whichever message it is. */
function described(facts: AlertFacts) {
  return {
    severity: facts.severity as AlertSeverity,
    rule: facts.rule,
    unitKey: facts.unitKey ?? '—',
    estimatorKey: facts.estimatorKey ?? '—',
    siteName: facts.siteName ?? '—',
    designRevision: facts.designRevision,
    summary: facts.summary,
    openedAtMs: facts.openedAtMs,
  };
}

function pending(facts: AlertFacts, recipientUserId: number): PendingNotification {
  return { recipientUserId, alertId: facts.id, ...described(facts) };
}

function mailAlert(facts: AlertFacts): MailAlert {
  return { id: facts.id, evidence: facts.evidence, ...described(facts) };
}

function email(person: Person, content: MailContent, alertIds: number[]): NewDelivery {
  return {
    channel: 'email',
    target: person.email,
    userId: person.id,
    subject: content.subject,
    content: { to: person.email, subject: content.subject, text: content.text, html: content.html },
    alertIds,
  };
}
