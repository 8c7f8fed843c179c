// Signatures for what Whitecap sends out: outgoing webhooks and the acknowledge
// links in e-mails. Both are HMAC-SHA256 (RFC 2104, FIPS 180-4) through node:crypto,
// compared in constant time.
import { createHmac, timingSafeEqual } from 'node:crypto';

/** The request header that carries a webhook's signature. */
export const WEBHOOK_SIGNATURE_HEADER = 'Whitecap-Signature';
/** Default tolerance, in seconds, between the signed timestamp and the receiver's clock. */
export const DEFAULT_WEBHOOK_TOLERANCE_SEC = 300;

type Secret = string | Buffer;

function hmac(secret: Secret, ...parts: (string | Buffer)[]): Buffer {
  const h = createHmac('sha256', secret);
  for (const p of parts) h.update(p);
  return h.digest();
}

function assertSecret(secret: Secret): void {
  if (secret.length === 0) throw new TypeError('a signing secret must not be empty');
}

/**
 * The Whitecap-Signature header value for a webhook body sent at `timestampSec`
 * (Unix seconds): `t=<timestampSec>,v1=<hex HMAC-SHA256 of "<timestampSec>.<body>">`.
 * The body is signed byte for byte as sent; a receiver must verify the raw body,
 * not a re-serialised copy of the parsed JSON.
 */
export function signWebhook(secret: Secret, timestampSec: number, body: Buffer | string): string {
  assertSecret(secret);
  if (!Number.isSafeInteger(timestampSec) || timestampSec < 0) throw new RangeError(`timestampSec must be whole Unix seconds, got ${timestampSec}`);
  return `t=${timestampSec},v1=${hmac(secret, `${timestampSec}.`, body).toString('hex')}`;
}

export type WebhookVerification = { ok: true } | { ok: false; reason: 'malformed' | 'stale' | 'mismatch' };

const HEX_SHA256 = /^[0-9a-f]{64}$/;

/**
 * Checks a Whitecap-Signature header against the raw body. `stale` when the signed
 * timestamp is more than `toleranceSec` away from `nowSec` in either direction (a
 * replay of an old delivery); a receiver that must refuse replays inside the window
 * too can remember the signatures it has seen for that long. The header may carry
 * several `v1=` values (one per secret while a secret is being rotated); any match
 * is enough.
 */
export function verifyWebhook(
  secret: Secret,
  header: string | undefined | null,
  body: Buffer | string,
  nowSec: number,
  toleranceSec: number = DEFAULT_WEBHOOK_TOLERANCE_SEC,
): WebhookVerification {
  assertSecret(secret);
  if (typeof header !== 'string' || header.length > 4096) return { ok: false, reason: 'malformed' };
  let timestamp: string | undefined;
  const signatures: Buffer[] = [];
  for (const item of header.split(',')) {
    const eq = item.indexOf('=');
    if (eq < 0) return { ok: false, reason: 'malformed' };
    const key = item.slice(0, eq).trim();
    const value = item.slice(eq + 1).trim();
    if (key === 't') {
      if (timestamp !== undefined || !/^\d{1,15}$/.test(value)) return { ok: false, reason: 'malformed' };
      timestamp = value;
    } else if (key === 'v1') {
      if (!HEX_SHA256.test(value)) return { ok: false, reason: 'malformed' };
      signatures.push(Buffer.from(value, 'hex'));
    } // other schemes: ignored, so a later version can be added alongside v1
  }
  if (timestamp === undefined || signatures.length === 0) return { ok: false, reason: 'malformed' };
  if (Math.abs(nowSec - Number(timestamp)) > toleranceSec) return { ok: false, reason: 'stale' };
  const expected = hmac(secret, `${timestamp}.`, body);
  // Every candidate is compared, in constant time each, whatever the outcome.
  let match = false;
  for (const s of signatures) match = timingSafeEqual(s, expected) || match;
  return match ? { ok: true } : { ok: false, reason: 'mismatch' };
}

/** What an acknowledge link stands for. */
export interface AckTokenPayload {
  alertId: number;
  userId: number;
  /** After this instant (UTC ms) the link no longer works. */
  expiresAtMs: number;
  /** Random, unique per link: the database records it when the link is used. */
  nonce: string;
}

export type AckTokenReading = { ok: true; payload: AckTokenPayload } | { ok: false; reason: 'malformed' | 'bad_signature' | 'expired' };

const TOKEN_VERSION = 1;
const NONCE = /^[A-Za-z0-9_-]{16,128}$/;
const BASE64URL = /^[A-Za-z0-9_-]+$/;

function isPositiveId(v: unknown): v is number {
  return typeof v === 'number' && Number.isSafeInteger(v) && v > 0;
}

/**
 * A URL-safe acknowledge token: `<base64url JSON payload>.<base64url HMAC-SHA256 of
 * the first part>`. It proves that Whitecap issued this link for this alert and this
 * person until `expiresAtMs`; it does not by itself stop a second use. Single use is
 * the database's job: acknowledging records the nonce under a unique constraint, and
 * a nonce already recorded is refused. Use a secret of its own (not the webhook
 * secrets) and a nonce of at least 16 URL-safe characters, e.g.
 * `randomBytes(18).toString('base64url')`.
 */
export function issueAckToken(secret: Secret, payload: AckTokenPayload): string {
  assertSecret(secret);
  if (!isPositiveId(payload.alertId) || !isPositiveId(payload.userId)) throw new RangeError('alertId and userId must be positive whole numbers');
  if (!Number.isSafeInteger(payload.expiresAtMs)) throw new RangeError('expiresAtMs must be whole milliseconds');
  if (!NONCE.test(payload.nonce)) throw new RangeError('nonce must be 16 to 128 URL-safe characters');
  const body = Buffer.from(
    JSON.stringify({ v: TOKEN_VERSION, a: payload.alertId, u: payload.userId, e: payload.expiresAtMs, n: payload.nonce }),
  ).toString('base64url');
  return `${body}.${hmac(secret, 'whitecap-ack.', body).toString('base64url')}`;
}

/**
 * Reads an acknowledge token: the payload when the signature is Whitecap's and the
 * link has not expired at `nowMs` (expired from `expiresAtMs` on). The signature is
 * checked before anything in the payload is trusted.
 */
export function readAckToken(secret: Secret, token: string, nowMs: number): AckTokenReading {
  assertSecret(secret);
  if (typeof token !== 'string' || token.length > 2048) return { ok: false, reason: 'malformed' };
  const parts = token.split('.');
  if (parts.length !== 2 || !BASE64URL.test(parts[0]) || !BASE64URL.test(parts[1])) return { ok: false, reason: 'malformed' };
  const [body, mac] = parts;
  const given = Buffer.from(mac, 'base64url');
  const expected = hmac(secret, 'whitecap-ack.', body);
  if (given.length !== expected.length || !timingSafeEqual(given, expected)) return { ok: false, reason: 'bad_signature' };
  let raw: unknown;
  try {
    raw = JSON.parse(Buffer.from(body, 'base64url').toString('utf8'));
  } catch {
    return { ok: false, reason: 'malformed' };
  }
  const p = raw as { v?: unknown; a?: unknown; u?: unknown; e?: unknown; n?: unknown } | null;
  if (
    !p ||
    typeof p !== 'object' ||
    p.v !== TOKEN_VERSION ||
    !isPositiveId(p.a) ||
    !isPositiveId(p.u) ||
    typeof p.e !== 'number' ||
    !Number.isSafeInteger(p.e) ||
    typeof p.n !== 'string' ||
    !NONCE.test(p.n)
  ) {
    return { ok: false, reason: 'malformed' };
  }
  if (nowMs >= p.e) return { ok: false, reason: 'expired' };
  return { ok: true, payload: { alertId: p.a, userId: p.u, expiresAtMs: p.e, nonce: p.n } };
}
