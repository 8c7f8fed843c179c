import { createHmac, randomBytes } from 'node:crypto';
import {
  DEFAULT_WEBHOOK_TOLERANCE_SEC,
  issueAckToken,
  readAckToken,
  signWebhook,
  verifyWebhook,
  WEBHOOK_SIGNATURE_HEADER,
  type AckTokenPayload,
} from './signing';

const secret = 'whsec-saltmarsh-test';
const body = '{"event":"alert.opened","alertId":42}';
const ts = 1767225600; // 2026-01-01T00:00:00Z

describe('HMAC-SHA256 primitive', () => {
  it('matches RFC 4231 test case 2 (value from memory, confirmed with OpenSSL 3.0)', () => {
    expect(createHmac('sha256', 'Jefe').update('what do ya want for nothing?').digest('hex')).toBe(
      '5bdcc146bf60754e6a042426089575c75a003f089d2739839dec58b964ec3843',
    );
  });
});

describe('webhook signature', () => {
  it('is t=<ts>,v1=<hex HMAC of "<ts>.<body>"> (expected value computed independently with `openssl dgst -sha256 -hmac`)', () => {
    expect(WEBHOOK_SIGNATURE_HEADER).toBe('Whitecap-Signature');
    expect(signWebhook(secret, ts, body)).toBe('t=1767225600,v1=770a2408fd6709ca3346a328184bb1af3ad8bd0cd1cb7baaa76dad60ac2e85ca');
    expect(signWebhook(secret, ts, Buffer.from(body))).toBe(signWebhook(secret, ts, body));
  });

  it('verifies the untouched body within the tolerance, either side of the clock', () => {
    const header = signWebhook(secret, ts, body);
    expect(verifyWebhook(secret, header, body, ts)).toEqual({ ok: true });
    expect(verifyWebhook(secret, header, Buffer.from(body), ts + DEFAULT_WEBHOOK_TOLERANCE_SEC)).toEqual({ ok: true });
    expect(verifyWebhook(secret, header, body, ts - DEFAULT_WEBHOOK_TOLERANCE_SEC)).toEqual({ ok: true });
  });

  it('refuses a tampered body, another secret, a forged timestamp', () => {
    const header = signWebhook(secret, ts, body);
    expect(verifyWebhook(secret, header, body.replace('42', '43'), ts)).toEqual({ ok: false, reason: 'mismatch' });
    expect(verifyWebhook(secret, header, `${body} `, ts)).toEqual({ ok: false, reason: 'mismatch' });
    expect(verifyWebhook('another-secret', header, body, ts)).toEqual({ ok: false, reason: 'mismatch' });
    const forged = header.replace(`t=${ts}`, `t=${ts + 60}`); // a replay with a fresher timestamp
    expect(verifyWebhook(secret, forged, body, ts + 60)).toEqual({ ok: false, reason: 'mismatch' });
  });

  it('refuses a replay outside the tolerance as stale', () => {
    const header = signWebhook(secret, ts, body);
    expect(verifyWebhook(secret, header, body, ts + 301)).toEqual({ ok: false, reason: 'stale' });
    expect(verifyWebhook(secret, header, body, ts - 301)).toEqual({ ok: false, reason: 'stale' });
    expect(verifyWebhook(secret, header, body, ts + 30, 10)).toEqual({ ok: false, reason: 'stale' });
  });

  it('calls a header it cannot read malformed', () => {
    const good = signWebhook(secret, ts, body);
    const v1 = good.split(',')[1];
    for (const header of [undefined, '', 'garbage', `t=${ts}`, v1, `t=abc,${v1}`, `t=${ts},v1=zz`, `t=${ts},v1=abcd`, `t=${ts},t=${ts},${v1}`]) {
      expect(verifyWebhook(secret, header, body, ts)).toEqual({ ok: false, reason: 'malformed' });
    }
  });

  it('accepts any of several v1 values (secret rotation) and ignores unknown schemes', () => {
    const old = signWebhook('old-secret', ts, body).split(',')[1];
    const current = signWebhook(secret, ts, body).split(',')[1];
    expect(verifyWebhook(secret, `t=${ts},${old},${current}`, body, ts)).toEqual({ ok: true });
    expect(verifyWebhook(secret, `t=${ts},v0=whatever,${current}`, body, ts)).toEqual({ ok: true });
    expect(verifyWebhook(secret, `t=${ts},${old}`, body, ts)).toEqual({ ok: false, reason: 'mismatch' });
  });
});

describe('acknowledge tokens', () => {
  const ackSecret = randomBytes(32);
  const now = Date.parse('2026-01-01T03:00:00Z');
  const payload: AckTokenPayload = { alertId: 42, userId: 7, expiresAtMs: now + 3_600_000, nonce: 'n0nce-Abcdefghijklm_' };

  it('is URL-safe, two base64url parts, and reads back as issued until it expires', () => {
    const token = issueAckToken(ackSecret, payload);
    expect(token).toMatch(/^[A-Za-z0-9_-]+\.[A-Za-z0-9_-]+$/);
    expect(encodeURIComponent(token)).toBe(token);
    expect(readAckToken(ackSecret, token, now)).toEqual({ ok: true, payload });
    expect(readAckToken(ackSecret, token, payload.expiresAtMs - 1)).toEqual({ ok: true, payload });
    expect(readAckToken(ackSecret, token, payload.expiresAtMs)).toEqual({ ok: false, reason: 'expired' });
  });

  it('refuses another secret and any edited payload as bad_signature', () => {
    const token = issueAckToken(ackSecret, payload);
    expect(readAckToken(randomBytes(32), token, now)).toEqual({ ok: false, reason: 'bad_signature' });
    const [, mac] = token.split('.');
    const edited = Buffer.from(JSON.stringify({ v: 1, a: 42, u: 1, e: payload.expiresAtMs, n: payload.nonce })).toString('base64url');
    expect(readAckToken(ackSecret, `${edited}.${mac}`, now)).toEqual({ ok: false, reason: 'bad_signature' });
    const longer = Buffer.from(JSON.stringify({ ...payload, expiresAtMs: payload.expiresAtMs * 2 })).toString('base64url');
    expect(readAckToken(ackSecret, `${longer}.${mac}`, now)).toEqual({ ok: false, reason: 'bad_signature' });
  });

  it('calls a token it cannot read malformed', () => {
    const token = issueAckToken(ackSecret, payload);
    for (const t of ['', 'abc', `${token}.x`, token.replace('.', '!'), 'a+b.c/d']) {
      expect(readAckToken(ackSecret, t, now)).toEqual({ ok: false, reason: 'malformed' });
    }
    // Correctly signed but not a token payload.
    const body = Buffer.from('{"hello":1}').toString('base64url');
    const mac = createHmac('sha256', ackSecret).update('whitecap-ack.').update(body).digest('base64url');
    expect(readAckToken(ackSecret, `${body}.${mac}`, now)).toEqual({ ok: false, reason: 'malformed' });
  });

  it('refuses to issue a token without a proper nonce or ids', () => {
    expect(() => issueAckToken(ackSecret, { ...payload, nonce: 'short' })).toThrow(RangeError);
    expect(() => issueAckToken(ackSecret, { ...payload, alertId: 0 })).toThrow(RangeError);
    expect(() => issueAckToken('', payload)).toThrow(TypeError);
  });
});
