// The e-mails Whitecap sends: a page for a new alert, a grouped summary for a storm,
// a handoff to the next person in line, and a resolution. Each comes as a subject,
// a plain-text body and a simple HTML body; every value that reaches the HTML is
// escaped, and every value that reaches the subject is made one line.
// Pure: the caller supplies links, names and times; nothing here reads a clock.
import { DateTime } from 'luxon';
import type { AlertSeverity } from '../../../shared/src/api/api-types';
import type { StormSummary } from './storm-grouping';

export interface MailContent {
  subject: string;
  text: string;
  html: string;
}

export interface MailContext {
  /** Where the dashboard lives, e.g. "https://whitecap.example.org" (no trailing slash needed). */
  baseUrl: string;
  /** IANA zone for the times shown (the rota's), default UTC. */
  timeZone?: string;
}

export interface MailAlert {
  id: number;
  severity: AlertSeverity;
  rule: string;
  unitKey: string;
  estimatorKey: string;
  siteName: string;
  designRevision: string | null;
  /** What fired, in words. */
  summary: string;
  /** The evidence: a ready line, or the alert's evidence object (made one line by evidenceLine). */
  evidence: string | Record<string, unknown>;
  openedAtMs: number;
}

export interface AckLink {
  url: string;
  expiresAtMs: number;
}

// ---------------------------------------------------------------- helpers

const HTML_ESCAPES: Record<string, string> = { '&': '&amp;', '<': '&lt;', '>': '&gt;', '"': '&quot;', "'": '&#39;' };

/** Text for an HTML element or a quoted attribute: the five characters HTML gives meaning to, as entities. */
export function escapeHtml(value: unknown): string {
  return String(value).replace(/[&<>"']/g, (c) => HTML_ESCAPES[c]);
}

/** One line for a header: control characters (CR, LF, …) become spaces, runs of space one. */
function oneLine(value: string): string {
  // eslint-disable-next-line no-control-regex
  return value.replace(/[\u0000-\u001f\u007f]+/g, ' ').replace(/\s{2,}/g, ' ').trim();
}

function num(x: number): string {
  if (Number.isInteger(x)) return String(x);
  return Number(x.toPrecision(4)).toString();
}

const SKIPPED_EVIDENCE_KEYS = new Set(['check', 'verdict', 'ready']);

/**
 * The evidence in one line: the top-level numbers, words and flags as `key=value`,
 * an interval `{lower, upper}` or a short list of numbers as `[a, b]`, numbers to 4
 * significant digits; at most `maxLength` characters.
 */
export function evidenceLine(evidence: Record<string, unknown>, maxLength = 200): string {
  const parts: string[] = [];
  for (const [key, v] of Object.entries(evidence)) {
    if (SKIPPED_EVIDENCE_KEYS.has(key)) continue;
    if (typeof v === 'number' && Number.isFinite(v)) parts.push(`${key}=${num(v)}`);
    else if (typeof v === 'string' || typeof v === 'boolean') parts.push(`${key}=${v}`);
    else if (Array.isArray(v) && v.length > 0 && v.length <= 4 && v.every((x) => typeof x === 'number')) parts.push(`${key}=[${v.map(num).join(', ')}]`);
    else if (v && typeof v === 'object' && typeof (v as { lower?: unknown }).lower === 'number' && typeof (v as { upper?: unknown }).upper === 'number') {
      const i = v as { lower: number; upper: number };
      parts.push(`${key}=[${num(i.lower)}, ${num(i.upper)}]`);
    }
  }
  const line = oneLine(parts.join(', ')) || 'see the alert';
  return line.length > maxLength ? `${line.slice(0, maxLength - 1)}…` : line;
}

function alertUrl(ctx: MailContext, id: number): string {
  return `${ctx.baseUrl.replace(/\/+$/, '')}/alerts/${id}`;
}

function inboxUrl(ctx: MailContext): string {
  return `${ctx.baseUrl.replace(/\/+$/, '')}/alerts`;
}

function when(ctx: MailContext, ms: number): string {
  const zone = ctx.timeZone ?? 'UTC';
  const t = DateTime.fromMillis(ms, { zone });
  return t.isValid ? `${t.toFormat('yyyy-LL-dd HH:mm')} ${zone === 'UTC' ? 'UTC' : `${zone} (UTC${t.toFormat('ZZ')})`}` : new Date(ms).toISOString();
}

function minutes(ms: number): string {
  const m = Math.round(ms / 60_000);
  return m === 1 ? '1 minute' : `${m} minutes`;
}

/** "tractor-07/position" */
function target(a: { unitKey: string; estimatorKey: string }): string {
  return `${a.unitKey}/${a.estimatorKey}`;
}

/** "CRITICAL nis-window on tractor-07/position" */
function headline(a: { severity: AlertSeverity; rule: string; unitKey: string; estimatorKey: string }): string {
  return `${a.severity.toUpperCase()} ${a.rule} on ${target(a)}`;
}

function subject(text: string): string {
  return oneLine(`[Whitecap] ${text}`);
}

function evidenceOf(a: MailAlert): string {
  return typeof a.evidence === 'string' ? oneLine(a.evidence) : evidenceLine(a.evidence);
}

function revisionWords(revision: string | null): string {
  return revision ?? 'no known design revision';
}

// Severity is shown by word and by colour together, never by colour alone.
const SEVERITY_COLOUR: Record<AlertSeverity, string> = { critical: '#b0246e', warning: '#c98a1b', info: '#1f7a80' };

function htmlPage(title: string, inner: string): string {
  return [
    '<!doctype html>',
    '<html><head><meta charset="utf-8"><title>',
    escapeHtml(title),
    '</title></head>',
    '<body style="margin:0;padding:24px;background:#fbf7ef;color:#151b23;font-family:Roboto,Arial,sans-serif;font-size:15px;line-height:1.5">',
    '<div style="max-width:640px;margin:0 auto">',
    '<p style="margin:0 0 16px;color:#0e4f55;font-weight:bold;letter-spacing:.04em">WHITECAP</p>',
    inner,
    '</div></body></html>',
  ].join('');
}

function severityBadge(s: AlertSeverity): string {
  return `<span style="display:inline-block;padding:2px 8px;border-radius:3px;background:${SEVERITY_COLOUR[s]};color:#ffffff;font-weight:bold">${escapeHtml(s.toUpperCase())}</span>`;
}

function link(href: string, label: string): string {
  return `<a href="${escapeHtml(href)}" style="color:#0e4f55">${escapeHtml(label)}</a>`;
}

function button(href: string, label: string): string {
  return `<a href="${escapeHtml(href)}" style="display:inline-block;padding:10px 18px;background:#0e4f55;color:#ffffff;text-decoration:none;border-radius:4px;font-weight:bold">${escapeHtml(label)}</a>`;
}

function factsTable(rows: [string, string][]): string {
  return (
    '<table style="border-collapse:collapse;margin:12px 0">' +
    rows
      .map(([k, v]) => `<tr><th style="text-align:left;padding:2px 16px 2px 0;color:#66707d;font-weight:normal;vertical-align:top">${escapeHtml(k)}</th><td style="padding:2px 0">${escapeHtml(v)}</td></tr>`)
      .join('') +
    '</table>'
  );
}

function alertFacts(ctx: MailContext, a: MailAlert): [string, string][] {
  return [
    ['What fired', a.summary],
    ['Rule', `${a.rule} (${a.severity})`],
    ['Unit / estimator', target(a)],
    ['Site', a.siteName],
    ['Design revision', revisionWords(a.designRevision)],
    ['Evidence', evidenceOf(a)],
    ['Opened', when(ctx, a.openedAtMs)],
  ];
}

function textFacts(rows: [string, string][]): string {
  const width = Math.max(...rows.map(([k]) => k.length));
  return rows.map(([k, v]) => `${`${k}:`.padEnd(width + 2)}${oneLine(v)}`).join('\n');
}

const TEXT_FOOTER = 'Whitecap verdicts are advisory: check the evidence before acting on a machine.';

// ---------------------------------------------------------------- messages

/** A new alert for the person on watch. */
export function pageMail(ctx: MailContext, alert: MailAlert, ack: AckLink): MailContent {
  const facts = alertFacts(ctx, alert);
  const url = alertUrl(ctx, alert.id);
  const text = [
    `${headline(alert)}`,
    '',
    textFacts(facts),
    '',
    `Open the alert: ${url}`,
    `Acknowledge without signing in (link works once, until ${when(ctx, ack.expiresAtMs)}):`,
    ack.url,
    '',
    'You get this because you are on watch.',
    TEXT_FOOTER,
    '',
  ].join('\n');
  const html = htmlPage(
    headline(alert),
    `<h1 style="font-size:20px;margin:0 0 8px">${severityBadge(alert.severity)} ${escapeHtml(alert.rule)} on ${escapeHtml(target(alert))}</h1>` +
      factsTable(facts) +
      `<p>${button(ack.url, 'Acknowledge')} &nbsp; ${link(url, 'Open the alert')}</p>` +
      `<p style="color:#66707d;font-size:13px">The acknowledge link needs no password, works once and expires ${escapeHtml(when(ctx, ack.expiresAtMs))}. You get this because you are on watch. ${escapeHtml(TEXT_FOOTER)}</p>`,
  );
  return { subject: subject(headline(alert)), text, html };
}

function countsLine(groups: { key: string | null; count: number }[], label: (k: string | null) => string): string {
  return groups.map((g) => `${label(g.key)} ${g.count}`).join(', ');
}

/** One message for the alerts held during a storm window. */
export function groupedMail(ctx: MailContext, summary: StormSummary, window: { windowStartMs: number; windowEndMs: number }): MailContent {
  const severities = summary.bySeverity.map((g) => `${g.count} ${g.key}`).join(', ');
  const span = minutes(window.windowEndMs - window.windowStartMs);
  const title = `${summary.count} alert${summary.count === 1 ? '' : 's'} in ${span}: ${severities}`;
  const site = (k: string | null) => `${k}:`;
  const revision = (k: string | null) => `${revisionWords(k)}:`;
  const rows: [string, string][] = [
    ['Between', `${when(ctx, window.windowStartMs)} and ${when(ctx, window.windowEndMs)}`],
    ['By severity', severities],
    ['By site', countsLine(summary.bySite, site)],
    ['By design revision', countsLine(summary.byDesignRevision, revision)],
  ];
  const more = summary.more > 0 ? `and ${summary.more} more in the inbox: ${inboxUrl(ctx)}` : null;
  const text = [
    `${title}.`,
    'So many alerts came in at once that they are gathered here instead of one message each.',
    '',
    textFacts(rows),
    '',
    ...summary.alerts.map((a) => `- ${headline(a)} (${oneLine(a.siteName)}): ${oneLine(a.summary)}\n  ${alertUrl(ctx, a.alertId)}`),
    ...(more ? [more] : []),
    '',
    `All open alerts: ${inboxUrl(ctx)}`,
    TEXT_FOOTER,
    '',
  ].join('\n');
  const items = summary.alerts
    .map(
      (a) =>
        `<li style="margin:4px 0">${severityBadge(a.severity)} ${link(alertUrl(ctx, a.alertId), `${a.rule} on ${target(a)}`)} <span style="color:#66707d">(${escapeHtml(a.siteName)})</span>: ${escapeHtml(a.summary)}</li>`,
    )
    .join('');
  const html = htmlPage(
    title,
    `<h1 style="font-size:20px;margin:0 0 8px">${escapeHtml(title)}</h1>` +
      '<p>So many alerts came in at once that they are gathered here instead of one message each.</p>' +
      factsTable(rows) +
      `<ul style="padding-left:20px">${items}</ul>` +
      (summary.more > 0 ? `<p>and ${escapeHtml(summary.more)} more in ${link(inboxUrl(ctx), 'the inbox')}</p>` : '') +
      `<p>${button(inboxUrl(ctx), 'Open the alert inbox')}</p>` +
      `<p style="color:#66707d;font-size:13px">${escapeHtml(TEXT_FOOTER)}</p>`,
  );
  return { subject: subject(title), text, html };
}

export interface HandoffDetails {
  /** Display names of the people who had it and did not acknowledge, in order. */
  notAcknowledgedBy: string[];
  /** How long each had to acknowledge, ms. */
  waitedMs: number;
  ack: AckLink;
}

/** An unacknowledged alert passed to the next person in line. */
export function handoffMail(ctx: MailContext, alert: MailAlert, d: HandoffDetails): MailContent {
  const who = d.notAcknowledgedBy.length > 0 ? d.notAcknowledgedBy.map(oneLine).join(', then ') : 'nobody on watch';
  const why = `Not acknowledged by ${who} within ${minutes(d.waitedMs)}, so it is handed to you.`;
  const facts = alertFacts(ctx, alert);
  const url = alertUrl(ctx, alert.id);
  const text = [
    `Handed to you: ${headline(alert)}`,
    '',
    why,
    '',
    textFacts(facts),
    '',
    `Open the alert: ${url}`,
    `Acknowledge without signing in (link works once, until ${when(ctx, d.ack.expiresAtMs)}):`,
    d.ack.url,
    '',
    TEXT_FOOTER,
    '',
  ].join('\n');
  const html = htmlPage(
    `Handed to you: ${headline(alert)}`,
    `<h1 style="font-size:20px;margin:0 0 8px">Handed to you: ${severityBadge(alert.severity)} ${escapeHtml(alert.rule)} on ${escapeHtml(target(alert))}</h1>` +
      `<p style="padding:8px 12px;background:#f3ead8;border-left:4px solid #c98a1b">${escapeHtml(why)}</p>` +
      factsTable(facts) +
      `<p>${button(d.ack.url, 'Acknowledge')} &nbsp; ${link(url, 'Open the alert')}</p>` +
      `<p style="color:#66707d;font-size:13px">The acknowledge link needs no password, works once and expires ${escapeHtml(when(ctx, d.ack.expiresAtMs))}. ${escapeHtml(TEXT_FOOTER)}</p>`,
  );
  return { subject: subject(`Handed to you: ${headline(alert)}`), text, html };
}

export interface ResolutionDetails {
  /** Display name of who resolved it; null when Whitecap closed it after its condition cleared. */
  resolvedBy: string | null;
  resolvedAtMs: number;
  note?: string | null;
}

/** An alert is over. */
export function resolutionMail(ctx: MailContext, alert: MailAlert, d: ResolutionDetails): MailContent {
  const by = d.resolvedBy === null ? 'Whitecap, after the condition cleared and stayed clear for the hold time' : oneLine(d.resolvedBy);
  const rows: [string, string][] = [
    ['Resolved', when(ctx, d.resolvedAtMs)],
    ['By', by],
    ...(d.note ? ([['Note', d.note]] as [string, string][]) : []),
    ['What fired', alert.summary],
    ['Site', alert.siteName],
    ['Opened', when(ctx, alert.openedAtMs)],
  ];
  const url = alertUrl(ctx, alert.id);
  const text = [`Resolved: ${headline(alert)}`, '', textFacts(rows), '', `The alert and its history: ${url}`, ''].join('\n');
  const html = htmlPage(
    `Resolved: ${headline(alert)}`,
    `<h1 style="font-size:20px;margin:0 0 8px">Resolved: ${severityBadge(alert.severity)} ${escapeHtml(alert.rule)} on ${escapeHtml(target(alert))}</h1>` +
      factsTable(rows) +
      `<p>${link(url, 'The alert and its history')}</p>`,
  );
  return { subject: subject(`Resolved: ${headline(alert)}`), text, html };
}

/** Many alerts resolved within one storm window, for someone who was paged for them. */
export function resolvedGroupMail(ctx: MailContext, summary: StormSummary, window: { windowStartMs: number; windowEndMs: number }): MailContent {
  const title = `${summary.count} alert${summary.count === 1 ? '' : 's'} you were paged for resolved`;
  const rows: [string, string][] = [
    ['Between', `${when(ctx, window.windowStartMs)} and ${when(ctx, window.windowEndMs)}`],
    ['By site', countsLine(summary.bySite, (k) => `${k}:`)],
  ];
  const text = [
    `${title}.`,
    '',
    textFacts(rows),
    '',
    ...summary.alerts.map((a) => `- ${headline(a)} (${oneLine(a.siteName)})\n  ${alertUrl(ctx, a.alertId)}`),
    ...(summary.more > 0 ? [`and ${summary.more} more`] : []),
    '',
    TEXT_FOOTER,
    '',
  ].join('\n');
  const items = summary.alerts
    .map((a) => `<li style="margin:4px 0">${severityBadge(a.severity)} ${link(alertUrl(ctx, a.alertId), `${a.rule} on ${target(a)}`)} <span style="color:#66707d">(${escapeHtml(a.siteName)})</span></li>`)
    .join('');
  const html = htmlPage(
    title,
    `<h1 style="font-size:20px;margin:0 0 8px">${escapeHtml(title)}</h1>` +
      factsTable(rows) +
      `<ul style="padding-left:20px">${items}</ul>` +
      (summary.more > 0 ? `<p>and ${escapeHtml(summary.more)} more</p>` : '') +
      `<p style="color:#66707d;font-size:13px">${escapeHtml(TEXT_FOOTER)}</p>`,
  );
  return { subject: subject(title), text, html };
}
