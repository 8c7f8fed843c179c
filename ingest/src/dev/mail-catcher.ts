// The local mail catcher: an SMTP server on loopback that keeps every message it is handed instead
// of relaying it, for `npm start` and `npm test`, with a small read-only web page to read them.
// Built on smtp-server (the SMTP side) and mailparser (MIME parsing); the page is plain node:http.
//
// It accepts any AUTH PLAIN or LOGIN (so a configured username and password work against it), or
// none. For fault tests, `setDown(true)` makes it refuse every new connection with `421` at the
// greeting, as a relay that is out of service would; `setDown(false)` takes mail again.
import http from 'node:http';
import type { AddressInfo } from 'node:net';
import { simpleParser, type AddressObject, type HeaderValue, type ParsedMail } from 'mailparser';
import { SMTPServer, type SMTPServerSession } from 'smtp-server';

export interface CapturedMail {
  /** Increasing from 1 for the life of the catcher; `clear()` does not reuse ids. */
  id: number;
  /** When the catcher accepted the message, ISO 8601 UTC. */
  receivedAt: string;
  /** The `From:` header's address (the envelope sender when the header has none). */
  from: string;
  /** The envelope recipients (RCPT TO), Bcc included: who the message was really delivered to. */
  to: string[];
  subject: string;
  text: string;
  html: string | null;
  /** Headers by lowercase name, decoded; repeated headers joined with ", ". */
  headers: Record<string, string>;
  /** The username the client authenticated as, or null when it sent no AUTH. */
  authUser: string | null;
}

export interface MailCatcherOptions {
  /** Loopback only; default 127.0.0.1. */
  host?: string;
  /** 0 (the default) takes a free port. */
  smtpPort?: number;
  /** The viewer's port; 0 takes a free port, null (the default) starts no viewer. */
  httpPort?: number | null;
  /** How many messages to keep; the oldest is dropped beyond it. Default 1000. */
  maxMessages?: number;
}

interface Waiter {
  predicate: (m: CapturedMail) => boolean;
  resolve: (m: CapturedMail) => void;
  reject: (err: Error) => void;
  timer: NodeJS.Timeout;
}

const MAX_SIZE = 10 * 1024 * 1024;
const LOOPBACK = /^(127(\.\d{1,3}){3}|::1|localhost)$/;

export class MailCatcher {
  private readonly captured: CapturedMail[] = [];
  private readonly waiters = new Set<Waiter>();
  private readonly smtp: SMTPServer;
  private web: http.Server | null = null;
  private ports: { smtp: number; http: number | null; url: string | null } = { smtp: 0, http: null, url: null };
  private nextId = 1;
  private down = false;
  private stopped = false;

  private constructor(private readonly maxMessages: number) {
    this.smtp = new SMTPServer({
      logger: false,
      authOptional: true,
      allowInsecureAuth: true,
      authMethods: ['PLAIN', 'LOGIN'],
      disabledCommands: ['STARTTLS'],
      size: MAX_SIZE,
      rejectOversized: true,
      closeTimeout: 2000,
      banner: 'Whitecap local mail catcher',
      onConnect: (_session, callback) => {
        if (this.down) {
          callback(smtpError(421, 'Service not available: the local mail catcher is set down'));
          return;
        }
        callback();
      },
      onAuth: (auth, _session, callback) => {
        callback(null, { user: auth.username ?? '' });
      },
      onData: (stream, session, callback) => {
        simpleParser(stream)
          .then((parsed) => {
            if (stream.sizeExceeded) {
              callback(smtpError(552, 'Message exceeds the 10 MB limit'));
              return;
            }
            this.capture(parsed, session);
            callback();
          })
          .catch((err: unknown) => callback(err instanceof Error ? err : new Error(String(err))));
      },
    });
  }

  static async start(opts: MailCatcherOptions = {}): Promise<MailCatcher> {
    const host = opts.host ?? '127.0.0.1';
    if (!LOOPBACK.test(host)) throw new Error(`mail catcher: host ${host} is not a loopback address`);
    const maxMessages = opts.maxMessages ?? 1000;
    if (!Number.isInteger(maxMessages) || maxMessages < 1) throw new Error('mail catcher: maxMessages must be a positive integer');

    const catcher = new MailCatcher(maxMessages);
    await listen(catcher.smtp, opts.smtpPort ?? 0, host);
    // Per-connection errors (a client hanging up mid-message) are emitted here; nothing to do.
    catcher.smtp.on('error', () => {});
    catcher.ports.smtp = (catcher.smtp.server.address() as AddressInfo).port;

    if (opts.httpPort !== undefined && opts.httpPort !== null) {
      const web = http.createServer((req, res) => catcher.serve(req, res));
      try {
        await listen(web, opts.httpPort, host);
      } catch (err) {
        await catcher.stop();
        throw err;
      }
      catcher.web = web;
      catcher.ports.http = (web.address() as AddressInfo).port;
      catcher.ports.url = `http://${host.includes(':') ? `[${host}]` : host}:${catcher.ports.http}/`;
    }
    return catcher;
  }

  get smtpPort(): number {
    return this.ports.smtp;
  }

  /** The viewer's port, or null without a viewer. */
  get httpPort(): number | null {
    return this.ports.http;
  }

  /** Where to read the captured mail, or null without a viewer. */
  get viewerUrl(): string | null {
    return this.ports.url;
  }

  /** The captured messages, oldest first (newest last). */
  messages(): CapturedMail[] {
    return this.captured.slice();
  }

  /** Resolves with the first message, already captured or yet to come, that matches. */
  waitFor(predicate: (m: CapturedMail) => boolean, timeoutMs = 10_000): Promise<CapturedMail> {
    const found = this.captured.find(predicate);
    if (found) return Promise.resolve(found);
    if (this.stopped) return Promise.reject(new Error('mail catcher: stopped'));
    return new Promise((resolve, reject) => {
      const waiter: Waiter = {
        predicate,
        resolve,
        reject,
        timer: setTimeout(() => {
          this.waiters.delete(waiter);
          reject(new Error(`mail catcher: no matching message within ${timeoutMs} ms (${this.captured.length} captured)`));
        }, timeoutMs),
      };
      this.waiters.add(waiter);
    });
  }

  /** Forgets every captured message. */
  clear(): void {
    this.captured.length = 0;
  }

  /** While down, every new SMTP connection is answered `421` and closed; the viewer stays up. */
  setDown(down: boolean): void {
    this.down = down;
  }

  async stop(): Promise<void> {
    if (this.stopped) return;
    this.stopped = true;
    for (const w of this.waiters) {
      clearTimeout(w.timer);
      w.reject(new Error('mail catcher: stopped'));
    }
    this.waiters.clear();
    const closing: Promise<void>[] = [new Promise((resolve) => this.smtp.close(() => resolve()))];
    if (this.web) {
      const web = this.web;
      closing.push(new Promise((resolve) => web.close(() => resolve())));
      web.closeAllConnections();
    }
    await Promise.all(closing);
  }

  private capture(parsed: ParsedMail, session: SMTPServerSession): void {
    const envelopeFrom = session.envelope.mailFrom ? session.envelope.mailFrom.address : '';
    const headerTo = addressesOf(parsed.to);
    const envelopeTo = session.envelope.rcptTo.map((r) => r.address);
    const mail: CapturedMail = {
      id: this.nextId++,
      receivedAt: new Date().toISOString(),
      from: addressesOf(parsed.from)[0] ?? envelopeFrom,
      to: envelopeTo.length ? envelopeTo : headerTo,
      subject: parsed.subject ?? '',
      text: parsed.text ?? '',
      html: parsed.html || null,
      headers: headersOf(parsed),
      authUser: session.user === undefined || session.user === null ? null : String(session.user),
    };
    this.captured.push(mail);
    if (this.captured.length > this.maxMessages) this.captured.splice(0, this.captured.length - this.maxMessages);
    for (const w of this.waiters) {
      if (!w.predicate(mail)) continue;
      clearTimeout(w.timer);
      this.waiters.delete(w);
      w.resolve(mail);
    }
  }

  // ---- the viewer ----

  private serve(req: http.IncomingMessage, res: http.ServerResponse): void {
    const path = new URL(req.url ?? '/', 'http://localhost').pathname;
    const method = req.method ?? 'GET';
    const read = method === 'GET' || method === 'HEAD';
    let m: RegExpExecArray | null;

    if (path === '/') {
      if (!read) return sendStatus(res, 405, 'GET, HEAD');
      return sendHtml(res, 200, renderList(this.captured));
    }
    if ((m = /^\/messages\/(\d+)$/.exec(path))) {
      if (!read) return sendStatus(res, 405, 'GET, HEAD');
      const mail = this.byId(Number(m[1]));
      return mail ? sendHtml(res, 200, renderMessage(mail)) : sendHtml(res, 404, renderNotFound());
    }
    if (path === '/api/messages') {
      if (read) return sendJson(res, 200, this.captured);
      if (method === 'DELETE') {
        this.clear();
        res.writeHead(204, securityHeaders()).end();
        return;
      }
      return sendStatus(res, 405, 'GET, HEAD, DELETE');
    }
    if ((m = /^\/api\/messages\/(\d+)$/.exec(path))) {
      if (!read) return sendStatus(res, 405, 'GET, HEAD');
      const mail = this.byId(Number(m[1]));
      return mail ? sendJson(res, 200, mail) : sendJson(res, 404, { error: `no captured message ${m[1]}` });
    }
    return sendJson(res, 404, { error: 'not found' });
  }

  private byId(id: number): CapturedMail | undefined {
    return this.captured.find((c) => c.id === id);
  }
}

function smtpError(responseCode: number, message: string): Error {
  return Object.assign(new Error(message), { responseCode });
}

function listen(server: { listen(port: number, host: string, cb: () => void): unknown; once(e: 'error', l: (err: Error) => void): unknown; off(e: 'error', l: (err: Error) => void): unknown }, port: number, host: string): Promise<void> {
  return new Promise((resolve, reject) => {
    const onError = (err: Error) => reject(err);
    server.once('error', onError);
    server.listen(port, host, () => {
      server.off('error', onError);
      resolve();
    });
  });
}

function addressesOf(value: AddressObject | AddressObject[] | undefined): string[] {
  const objects = value === undefined ? [] : Array.isArray(value) ? value : [value];
  const out: string[] = [];
  const walk = (list: { address?: string; group?: { address?: string }[] }[]) => {
    for (const a of list) {
      if (a.address) out.push(a.address);
      if (a.group) walk(a.group);
    }
  };
  for (const o of objects) walk(o.value);
  return out;
}

function headersOf(parsed: ParsedMail): Record<string, string> {
  const out: Record<string, string> = {};
  for (const { key, line } of parsed.headerLines) {
    if (key in out) continue; // all values of a repeated header are taken at its first line
    const value = parsed.headers.get(key);
    const raw = line.slice(line.indexOf(':') + 1).replace(/\r?\n[ \t]+/g, ' ').trim();
    out[key] = value === undefined ? raw : (headerText(value) ?? raw);
  }
  return out;
}

/** A parsed header value as text, or undefined where the raw line says it better. */
function headerText(value: HeaderValue): string | undefined {
  if (typeof value === 'string') return value;
  if (value instanceof Date) return value.toISOString();
  if (Array.isArray(value)) {
    const parts = (value as HeaderValue[]).map(headerText);
    return parts.every((p) => p !== undefined) ? parts.join(', ') : undefined;
  }
  if ('text' in value && typeof value.text === 'string') return value.text; // an address header
  if ('value' in value && typeof value.value === 'string') {
    const params = 'params' in value && value.params ? Object.entries(value.params as Record<string, string>) : [];
    return [value.value, ...params.map(([k, v]) => `${k}=${v}`)].join('; ');
  }
  return undefined;
}

// ---- HTML ----

const CSP = [
  "default-src 'none'",
  "style-src 'unsafe-inline'",
  'img-src data:',
  "frame-src 'self'",
  "base-uri 'none'",
  "form-action 'none'",
  "frame-ancestors 'none'",
].join('; ');

function securityHeaders(): Record<string, string> {
  return {
    'content-security-policy': CSP,
    'x-content-type-options': 'nosniff',
    'referrer-policy': 'no-referrer',
    'cache-control': 'no-store',
  };
}

function sendHtml(res: http.ServerResponse, status: number, body: string): void {
  res.writeHead(status, { ...securityHeaders(), 'content-type': 'text/html; charset=utf-8' }).end(body);
}

function sendJson(res: http.ServerResponse, status: number, body: unknown): void {
  res.writeHead(status, { ...securityHeaders(), 'content-type': 'application/json; charset=utf-8' }).end(JSON.stringify(body));
}

function sendStatus(res: http.ServerResponse, status: number, allow: string): void {
  res.writeHead(status, { ...securityHeaders(), allow, 'content-type': 'application/json; charset=utf-8' }).end(JSON.stringify({ error: 'method not allowed' }));
}

export function escapeHtml(s: string): string {
  return s.replace(/[&<>"']/g, (c) => ({ '&': '&amp;', '<': '&lt;', '>': '&gt;', '"': '&quot;', "'": '&#39;' })[c]!);
}

/**
 * Escapes the text, then turns http(s) URLs into links. The URL pattern runs over the escaped
 * text, so it stops at an escaped quote or angle bracket, and the href is already escaped.
 */
export function linkify(text: string): string {
  const escaped = escapeHtml(text);
  return escaped.replace(/https?:\/\/(?:(?!&(?:quot|lt|gt|#39);)[^\s"'<>])+/g, (match) => {
    const trail = /[.,;:!?)\]]+$/.exec(match)?.[0] ?? '';
    const url = match.slice(0, match.length - trail.length);
    return `<a href="${url}" rel="noreferrer noopener" target="_blank">${url}</a>${trail}`;
  });
}

function when(iso: string): string {
  return `${iso.slice(0, 10)} ${iso.slice(11, 19)} UTC`;
}

const STYLE = `
:root { --teal: #0e4f55; --teal-deep: #08363a; --ink: #151b23; --ink-soft: #66707d; --sand: #fbf7ef; --sand-2: #f3ead8; --sand-line: #dccaa6; }
* { box-sizing: border-box; }
body { margin: 0; font: 15px/1.5 system-ui, sans-serif; color: var(--ink); background: var(--sand); }
header { background: var(--teal); color: #fff; padding: 14px 24px; }
header h1 { margin: 0; font-size: 20px; font-weight: 600; }
header p { margin: 2px 0 0; color: #cfe8e6; font-size: 14px; }
header a { color: #fff; }
main { padding: 20px 24px; max-width: 1100px; }
table { width: 100%; border-collapse: collapse; background: #fff; border: 1px solid var(--sand-line); }
th, td { text-align: left; padding: 8px 12px; border-bottom: 1px solid var(--sand-line); vertical-align: top; }
th { background: var(--sand-2); font-weight: 600; font-size: 13px; color: var(--ink-soft); }
td.time { white-space: nowrap; color: var(--ink-soft); font-variant-numeric: tabular-nums; }
a { color: var(--teal); }
dl { display: grid; grid-template-columns: max-content 1fr; gap: 4px 16px; background: #fff; border: 1px solid var(--sand-line); padding: 12px 16px; }
dt { color: var(--ink-soft); }
dd { margin: 0; overflow-wrap: anywhere; }
h2 { font-size: 16px; color: var(--teal-deep); margin: 24px 0 8px; }
pre { white-space: pre-wrap; overflow-wrap: anywhere; background: #fff; border: 1px solid var(--sand-line); padding: 12px 16px; margin: 0; font: 14px/1.5 ui-monospace, monospace; }
iframe { width: 100%; height: 480px; border: 1px solid var(--sand-line); background: #fff; }
.empty { color: var(--ink-soft); }
footer { padding: 0 24px 24px; color: var(--ink-soft); font-size: 13px; }
`;

function page(title: string, body: string): string {
  return `<!doctype html>
<html lang="en"><head><meta charset="utf-8"><meta name="viewport" content="width=device-width, initial-scale=1">
<title>${escapeHtml(title)}</title><style>${STYLE}</style></head>
<body><header><h1><a href="/">Whitecap · captured mail</a></h1>
<p>The local stand-in for a mail relay: mail sent to it is kept here and goes nowhere else.</p></header>
<main>${body}</main>
<footer>JSON at <a href="/api/messages">/api/messages</a>; <code>DELETE /api/messages</code> clears the mailbox.</footer>
</body></html>`;
}

function renderList(mails: readonly CapturedMail[]): string {
  if (mails.length === 0) return page('Whitecap · captured mail', '<p class="empty">No mail captured yet.</p>');
  const rows = mails
    .slice()
    .reverse()
    .map(
      (m) => `<tr><td class="time">${escapeHtml(when(m.receivedAt))}</td><td>${escapeHtml(m.to.join(', '))}</td>` +
        `<td><a href="/messages/${m.id}">${escapeHtml(m.subject || '(no subject)')}</a></td></tr>`,
    )
    .join('\n');
  const count = `<p>${mails.length} message${mails.length === 1 ? '' : 's'}, newest first.</p>`;
  return page(
    'Whitecap · captured mail',
    `${count}<table><thead><tr><th>Received</th><th>To</th><th>Subject</th></tr></thead><tbody>\n${rows}\n</tbody></table>`,
  );
}

function renderMessage(m: CapturedMail): string {
  const summary: [string, string][] = [
    ['Received', when(m.receivedAt)],
    ['From', m.headers['from'] ?? m.from],
    ['To', m.to.join(', ')],
    ['Subject', m.subject || '(no subject)'],
  ];
  if (m.headers['date']) summary.push(['Date', m.headers['date']]);
  if (m.headers['message-id']) summary.push(['Message-ID', m.headers['message-id']]);
  if (m.authUser !== null) summary.push(['Authenticated as', m.authUser]);
  const dl = summary.map(([k, v]) => `<dt>${escapeHtml(k)}</dt><dd>${escapeHtml(v)}</dd>`).join('');
  let body = `<p><a href="/">← all captured mail</a></p><dl>${dl}</dl>`;
  body += `<h2>Text</h2><pre>${m.text ? linkify(m.text) : '<span class="empty">(no text part)</span>'}</pre>`;
  if (m.html !== null) {
    // Sandboxed without allow-scripts or allow-same-origin: the mail's HTML runs no script and
    // inherits this page's Content-Security-Policy, so it loads nothing from outside either.
    // Its links open in a new tab.
    const doc = `<base target="_blank">${m.html}`;
    body += `<h2>HTML</h2><iframe title="HTML body" sandbox="allow-popups allow-popups-to-escape-sandbox" srcdoc="${escapeHtml(doc)}"></iframe>`;
  }
  return page(`${m.subject || '(no subject)'} · captured mail`, body);
}

function renderNotFound(): string {
  return page('Not found · captured mail', '<p>No such message: it may have been cleared or dropped as the mailbox filled.</p>');
}
