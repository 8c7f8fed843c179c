// Sends the outbox: e-mail through SMTP (nodemailer), webhooks as signed HTTP POSTs.
// A delivery is claimed before it is sent, so it goes out once; a failure is retried
// with backoff (1 s, 2 s, 4 s, … up to 5 minutes, or WHITECAP_DELIVERY_RETRY_MAX_MS) and,
// after the last attempt, kept as failed with its error for the delivery log, where an
// admin can send it again.
import nodemailer, { type Transporter } from 'nodemailer';
import { systemClock, type Clock } from '../clock';
import type { Logger } from '../logger';
import type { DeliveryRow, NotifyRepository } from './notify-repository';
import { WEBHOOK_SIGNATURE_HEADER, signWebhook } from './signing';

export interface DispatcherSettings {
  smtp: { host: string; port: number; secure: boolean; user: string | null; password: string | null };
  mailFrom: string;
  maxAttempts: number;
  webhookTimeoutMs: number;
  /** First retry delay; doubles each attempt (default 1 s). */
  retryBaseMs?: number;
  /** Longest retry delay (default 5 minutes). */
  retryMaxMs?: number;
}

const MAX_RETRY_MS = 5 * 60_000;

/** An error's message, with the cause behind fetch's bare "fetch failed" (e.g. ECONNREFUSED). */
function errorText(err: unknown): string {
  const e = err as (Error & { cause?: { code?: string; message?: string } }) | undefined;
  const message = e?.message || String(err);
  const cause = e?.cause?.code ?? e?.cause?.message;
  return cause && !message.includes(cause) ? `${message} (${cause})` : message;
}

/** https anywhere; plain http only to this machine (loopback). */
export function webhookUrlProblem(raw: string): string | null {
  let url: URL;
  try {
    url = new URL(raw);
  } catch {
    return 'not a URL';
  }
  if (url.username || url.password) return 'must not carry a user name or password';
  if (url.protocol === 'https:') return null;
  if (url.protocol !== 'http:') return 'must be an https:// URL';
  const host = url.hostname.replace(/^\[|\]$/g, '');
  const loopback = host === 'localhost' || host === '::1' || /^127\.\d{1,3}\.\d{1,3}\.\d{1,3}$/.test(host);
  return loopback ? null : 'must be https:// (plain http:// only to this machine, 127.0.0.1 or localhost)';
}

export class Dispatcher {
  private readonly transport: Transporter;
  private running = false;
  private readonly secrets = new Map<number, string>();

  constructor(
    private readonly repo: NotifyRepository,
    private readonly logger: Logger,
    private readonly settings: DispatcherSettings,
    private readonly clock: Clock = systemClock,
  ) {
    const { smtp } = settings;
    this.transport = nodemailer.createTransport({
      host: smtp.host,
      port: smtp.port,
      secure: smtp.secure,
      auth: smtp.user ? { user: smtp.user, pass: smtp.password ?? '' } : undefined,
      // The local stand-in speaks no TLS; a real relay on 587 upgrades with STARTTLS.
      ignoreTLS: !smtp.secure && smtp.port === 1025,
      connectionTimeout: 10_000,
      greetingTimeout: 10_000,
      socketTimeout: 20_000,
    });
  }

  /** Sends what is due; returns how many went out. Overlapping calls do nothing. */
  async runOnce(limit = 25): Promise<number> {
    if (this.running) return 0;
    this.running = true;
    try {
      const due = await this.repo.claimDue(limit);
      if (due.length === 0) return 0;
      const endpoints = await this.repo.webhooks();
      for (const ep of endpoints) this.secrets.set(ep.id, ep.secret);
      const results = await Promise.all(due.map((d) => this.send(d)));
      return results.filter(Boolean).length;
    } finally {
      this.running = false;
    }
  }

  close(): void {
    this.transport.close();
  }

  private async send(d: DeliveryRow): Promise<boolean> {
    try {
      if (d.channel === 'email') await this.sendMail(d);
      else await this.sendWebhook(d);
      await this.repo.markSent(d.id);
      return true;
    } catch (err) {
      const message = errorText(err);
      const last = d.attempts >= this.settings.maxAttempts;
      const retryIn = last ? null : Math.min((this.settings.retryBaseMs ?? 1000) * 2 ** (d.attempts - 1), this.settings.retryMaxMs ?? MAX_RETRY_MS);
      await this.repo.markFailed(d.id, message, retryIn);
      this.logger.warn({ delivery: d.id, channel: d.channel, attempt: d.attempts, err: message, retryInMs: retryIn }, last ? 'delivery failed for good' : 'delivery failed; will retry');
      return false;
    }
  }

  private async sendMail(d: DeliveryRow): Promise<void> {
    const c = d.content as { to: string; subject: string; text: string; html: string };
    await this.transport.sendMail({
      from: this.settings.mailFrom,
      to: c.to,
      subject: c.subject,
      text: c.text,
      html: c.html,
      headers: { 'X-Whitecap-Delivery': String(d.id) },
    });
  }

  private async sendWebhook(d: DeliveryRow): Promise<void> {
    if (d.endpointId === null) throw new Error('webhook delivery without an endpoint');
    const secret = this.secrets.get(d.endpointId);
    if (!secret) throw new Error('the endpoint is no longer registered');
    const problem = webhookUrlProblem(d.target);
    if (problem) throw new Error(`refused to send: the URL ${problem}`);
    const body = (d.content as { body: string }).body;
    const ts = Math.floor(this.clock.now() / 1000);
    const res = await fetch(d.target, {
      method: 'POST',
      headers: {
        'content-type': 'application/json',
        'user-agent': 'Whitecap-Webhook/1',
        [WEBHOOK_SIGNATURE_HEADER]: signWebhook(secret, ts, body),
        'Whitecap-Event': d.subject,
        'Whitecap-Delivery': String(d.id),
      },
      body,
      // Only the registered address: redirects are not followed.
      redirect: 'manual',
      signal: AbortSignal.timeout(this.settings.webhookTimeoutMs),
    });
    await res.arrayBuffer().catch(() => undefined);
    if (res.status < 200 || res.status >= 300) throw new Error(`the endpoint answered ${res.status}`);
  }
}
