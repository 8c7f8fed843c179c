// The notification side end to end: the real service raises alerts from simulated
// estimators, pages whoever is on the watch rota through a real SMTP server (the local
// fake), hands off what nobody acknowledges, and calls a real webhook receiver on
// loopback with signed events; every message and call is in the delivery log.
import http from 'node:http';
import knexFactory, { type Knex } from 'knex';
import { demoDeviceSecret } from '../../ingest/src/demo/saltmarsh';
import { MailCatcher, type CapturedMail } from '../../ingest/src/dev/mail-catcher';
import { issueAckToken, verifyWebhook, WEBHOOK_SIGNATURE_HEADER } from '../../ingest/src/notify/signing';
import { publishSamples, type Fault, type PlantKind } from '../../simulators/src/index';
import { api, signIn, type Session } from '../support/api';
import { createTestDatabase, type TestDatabase } from '../support/database';
import { runCli, startService, type ServiceHandle } from '../support/service';

jest.setTimeout(120_000);

const LINK_SECRET = 'test-link-secret-0123456789abcdef0123456789';
const RESPONDER = 'responder@saltmarsh.example';
const ADMIN = 'admin@saltmarsh.example';

async function waitFor<T>(what: string, probe: () => Promise<T | null | undefined | false> | T | null | undefined | false, timeoutMs = 20_000): Promise<NonNullable<Exclude<T, false>>> {
  const deadline = Date.now() + timeoutMs;
  while (Date.now() < deadline) {
    const v = await probe();
    if (v) return v as NonNullable<Exclude<T, false>>;
    await new Promise((r) => setTimeout(r, 100));
  }
  throw new Error(`timed out waiting for ${what}`);
}

describe('notifications: pages, acknowledge links, handoff, webhooks, delivery log', () => {
  let db: TestDatabase;
  let knex: Knex;
  let mail: MailCatcher;
  let service: ServiceHandle;
  let admin: Session;
  let responder: Session;

  const publish = (unit: string, estimator: string, kind: PlantKind, count: number, faults: Fault[]) =>
    publishSamples({
      url: `mqtt://127.0.0.1:${service.mqttPort}`,
      unit,
      secret: demoDeviceSecret(unit),
      estimator,
      kind,
      count,
      faults,
      clock: 'model',
      batchSize: 50,
      seed: 21,
    });
  const firstAlertOf = async (unit: string, estimator: string): Promise<{ id: number; rule: string; severity: string; state: string }> =>
    waitFor(`an alert on ${unit}/${estimator}`, async () =>
      knex('alerts as a')
        .join('estimators as e', 'e.id', 'a.estimator_id')
        .join('units as u', 'u.id', 'e.unit_id')
        .where({ 'u.key': unit, 'e.key': estimator })
        .orderBy('a.id')
        .first('a.id', 'a.rule', 'a.severity', 'a.state')
        .then((r) => (r ? { ...r, id: Number(r.id) } : r)),
    );
  const mentions = (m: CapturedMail, alertId: number) => new RegExp(`/alerts/${alertId}(?!\\d)`).test(m.text);
  const mailsTo = (address: string, alertId: number): CapturedMail[] => mail.messages().filter((m) => m.to.includes(address) && mentions(m, alertId));
  const ackTokenIn = (m: CapturedMail): string => {
    const match = /\/ack\/([A-Za-z0-9_.-]+)/.exec(m.text);
    if (!match) throw new Error(`no acknowledge link in:\n${m.text}`);
    return match[1];
  };
  const ackLink = (token: string, method: 'GET' | 'POST' = 'GET') => fetch(`${service.url}/api/acknowledgements/${token}`, { method });

  beforeAll(async () => {
    db = await createTestDatabase('notifications');
    await runCli('ingest/cli/seed.ts', [], { WHITECAP_DATABASE_URL: db.url });
    knex = knexFactory({ client: 'pg', connection: db.url, pool: { min: 0, max: 3 } });
    mail = await MailCatcher.start({ httpPort: null });
    service = await startService({
      WHITECAP_DATABASE_URL: db.url,
      WHITECAP_SMTP_PORT: String(mail.smtpPort),
      WHITECAP_LINK_SECRET: LINK_SECRET,
      WHITECAP_DISPATCH_EVERY_MS: '200',
      WHITECAP_NOTIFY_SWEEP_MS: '250',
      WHITECAP_STORM_WINDOW_MS: '2000',
      WHITECAP_STATUS_EVERY_MS: '100',
      WHITECAP_SWEEP_EVERY_MS: '100',
      WHITECAP_ALERT_HOLD_MS: '60000',
    });
    admin = await signIn(service.url, ADMIN, 'saltmarsh-admin');
    responder = await signIn(service.url, RESPONDER, 'saltmarsh-responder');
    // Quiet hours would make this test depend on the time of day it runs.
    for (const severity of ['critical', 'warning']) {
      const r = await api(service.url, admin, `/notification-rules/${severity}`, { method: 'PATCH', body: { quietFrom: null, quietTo: null } });
      expect(r.status).toBe(200);
    }
  });
  afterAll(async () => {
    await service?.stop();
    await mail?.stop();
    await knex?.destroy();
    await db?.drop();
  });

  it('shows who is on watch on the demo rota', async () => {
    const { status, body } = await api(service.url, responder, '/rotas');
    expect(status).toBe(200);
    expect(body).toHaveLength(1);
    expect(body[0].scope).toEqual({ kind: 'fleet' });
    expect(body[0].onWatch.displayName).toMatch(/Ravi Castellan/);
    expect(body[0].handoffChain.map((p: { displayName: string }) => p.displayName)).toEqual([expect.stringMatching(/Ravi/), expect.stringMatching(/Ade Marsh/)]);
    // Only admins edit it.
    const refused = await api(service.url, responder, `/rotas/${body[0].id}/overrides`, {
      method: 'POST',
      body: { from: new Date().toISOString(), to: new Date(Date.now() + 3_600_000).toISOString(), userId: 1 },
    });
    expect(refused.status).toBe(403);
  });

  it('pages the responder on watch with one e-mail naming what fired, whose link acknowledges once', async () => {
    await publish('cabinet-02', 'thermal', 'cabinet-thermal', 1400, [{ kind: 'noise', factor: 3, when: { fromSeq: 1001 } }]);
    const alert = await firstAlertOf('cabinet-02', 'thermal');
    const page = await mail.waitFor((m) => m.to.includes(RESPONDER) && mentions(m, alert.id));
    expect(page.subject).toMatch(new RegExp(`^\\[Whitecap\\] (CRITICAL|WARNING) ${alert.rule} on cabinet-02/thermal`));
    expect(page.text).toContain(`${service.url}/alerts/${alert.id}`);
    expect(page.text).toMatch(/evidence/i);
    // One page for this alert, and to nobody else.
    await new Promise((r) => setTimeout(r, 1000));
    expect(mailsTo(RESPONDER, alert.id)).toHaveLength(1);
    expect(mail.messages().filter((m) => !m.to.includes(RESPONDER))).toHaveLength(0);
    const trail = await knex('alert_events').where({ alert_id: alert.id }).orderBy('id').pluck('kind');
    expect(trail).toEqual(expect.arrayContaining(['opened', 'paged']));

    const token = ackTokenIn(page);
    const info = await ackLink(token);
    expect(info.status).toBe(200);
    expect(await info.json()).toMatchObject({ alert: { id: alert.id, state: 'open' }, recipient: expect.stringMatching(/Ravi/), usable: true });
    const first = await ackLink(token, 'POST');
    expect(first.status).toBe(200);
    expect(await first.json()).toMatchObject({ alertId: alert.id, acknowledgedBy: expect.stringMatching(/Ravi/) });
    const row = await knex('alerts').where({ id: alert.id }).first('state', 'acknowledged_by');
    const responderId = (await knex('users').where({ email: RESPONDER }).first('id')).id;
    expect(row).toEqual({ state: 'acknowledged', acknowledged_by: responderId });
    const ackEvent = await knex('alert_events').where({ alert_id: alert.id, kind: 'acknowledged' }).first('actor_user_id', 'note');
    expect(ackEvent).toEqual({ actor_user_id: responderId, note: expect.stringMatching(/e-mail/) });

    const again = await ackLink(token, 'POST');
    expect(again.status).toBe(409);
    expect((await again.json()).type).toMatch(/link-used$/);
    expect((await (await ackLink(token)).json()).reason).toBe('used');

    // Expired: a link Whitecap signed whose time is up.
    const nonce = 'expired-link-nonce-0001';
    const expiresAtMs = Date.now() - 1000;
    await knex('ack_links').insert({ nonce, alert_id: alert.id, user_id: responderId, expires_at: new Date(expiresAtMs) });
    const expired = issueAckToken(LINK_SECRET, { alertId: alert.id, userId: responderId, expiresAtMs, nonce });
    const late = await ackLink(expired, 'POST');
    expect(late.status).toBe(410);
    expect((await late.json()).type).toMatch(/link-expired$/);
    // Tampered: the payload changed, the signature not.
    const [payload, mac] = token.split('.');
    const forged = `${Buffer.from(JSON.stringify({ ...JSON.parse(Buffer.from(payload, 'base64url').toString()), a: alert.id + 1 })).toString('base64url')}.${mac}`;
    expect((await ackLink(forged, 'POST')).status).toBe(404);
  });

  it('hands an alert nobody acknowledges to the next person in line, then the team, with each step in the trail', async () => {
    for (const severity of ['critical', 'warning']) {
      const r = await api(service.url, admin, `/notification-rules/${severity}`, { method: 'PATCH', body: { handoffAfterMinutes: 0.1 } });
      expect(r.body.handoffAfterMinutes).toBeCloseTo(0.1);
    }
    await publish('cabinet-03', 'thermal', 'cabinet-thermal', 1400, [{ kind: 'noise', factor: 3, when: { fromSeq: 1001 } }]);
    const alert = await firstAlertOf('cabinet-03', 'thermal');
    const handed = await mail.waitFor((m) => m.to.includes(ADMIN) && mentions(m, alert.id), 30_000);
    expect(handed.subject).toMatch(/Handed to you/);
    expect(handed.text).toMatch(/Not acknowledged by Ravi Castellan/);
    const trail = await waitFor('the team step', async () => {
      const rows = await knex('alert_events').where({ alert_id: alert.id }).whereIn('kind', ['paged', 'handoff']).orderBy('id').select('kind', 'note');
      return rows.length >= 3 ? rows : null;
    });
    expect(trail[0]).toMatchObject({ kind: 'paged', note: expect.stringMatching(/Ravi/) });
    expect(trail[1]).toMatchObject({ kind: 'handoff', note: expect.stringMatching(/handed to Ade Marsh/) });
    expect(trail[2]).toMatchObject({ kind: 'handoff', note: expect.stringMatching(/whole response team/) });
    // Acknowledged now: no further step.
    const ack = await api(service.url, responder, `/alerts/${alert.id}/acknowledge`, { method: 'POST', body: {} });
    expect(ack.status).toBe(200);
    const paging = await knex('alert_paging').where({ alert_id: alert.id }).first('next_handoff_at');
    expect(paging.next_handoff_at).toBeNull();
    for (const severity of ['critical', 'warning']) {
      await api(service.url, admin, `/notification-rules/${severity}`, { method: 'PATCH', body: { handoffAfterMinutes: 10 } });
    }
  });

  it('signs webhook events; a receiver that fails twice gets the event on the third try; replays and tampering fail', async () => {
    const received: { body: string; signature: string; delivery: string; verified: boolean }[] = [];
    let secret = '';
    const receiver = http.createServer((req, res) => {
      let body = '';
      req.on('data', (c) => (body += c));
      req.on('end', () => {
        const signature = String(req.headers[WEBHOOK_SIGNATURE_HEADER.toLowerCase()] ?? '');
        const verified = verifyWebhook(secret, signature, body, Math.floor(Date.now() / 1000)).ok;
        received.push({ body, signature, delivery: String(req.headers['whitecap-delivery']), verified });
        res.statusCode = received.length <= 2 ? 500 : verified ? 204 : 401;
        res.end();
      });
    });
    await new Promise<void>((r) => receiver.listen(0, '127.0.0.1', () => r()));
    const port = (receiver.address() as { port: number }).port;
    try {
      // Only https, or plain http to this machine.
      const outside = await api(service.url, admin, '/webhooks', { method: 'POST', body: { url: 'http://198.51.100.7/hook', description: 'not allowed' } });
      expect(outside.status).toBe(400);
      const created = await api(service.url, admin, '/webhooks', { method: 'POST', body: { url: `http://127.0.0.1:${port}/whitecap`, description: 'test receiver' } });
      expect(created.status).toBe(201);
      secret = created.body.secret;
      expect(secret.length).toBeGreaterThanOrEqual(32);
      expect((await api(service.url, admin, '/webhooks')).body[0]).not.toHaveProperty('secret');

      // An alert event: a note on an open alert of the demo fleet is not one; resolving is.
      const open = await knex('alerts').where({ state: 'acknowledged' }).orderBy('id').first('id');
      const resolved = await api(service.url, responder, `/alerts/${open.id}/resolve`, { method: 'POST', body: { note: 'sensor reseated' } });
      expect(resolved.status).toBe(200);
      await waitFor('the third attempt', () => received.length >= 3, 20_000);
      expect(new Set(received.map((r) => r.delivery)).size).toBe(1);
      expect(received.every((r) => r.verified)).toBe(true);
      const event = JSON.parse(received[2].body);
      expect(event).toMatchObject({ type: 'alert.resolved', actor: expect.stringMatching(/Ravi/), alert: { id: Number(open.id), state: 'resolved' } });
      const log = await waitFor('the delivery marked sent', async () => {
        const { body } = await api(service.url, responder, '/deliveries?channel=webhook');
        return body.items.find((d: { status: string }) => d.status === 'sent');
      });
      expect(log).toMatchObject({ attempts: 3, target: `http://127.0.0.1:${port}/whitecap`, subject: 'alert.resolved', lastError: null });

      // What a receiver must refuse: a body changed in transit, and an old signature replayed.
      const { body, signature } = received[2];
      expect(verifyWebhook(secret, signature, body.replace('resolved', 'acknowledged'), Math.floor(Date.now() / 1000))).toEqual({ ok: false, reason: 'mismatch' });
      expect(verifyWebhook(secret, signature, body, Math.floor(Date.now() / 1000) + 3600)).toEqual({ ok: false, reason: 'stale' });
    } finally {
      await new Promise((r) => receiver.close(r));
      await api(service.url, admin, `/webhooks/${(await api(service.url, admin, '/webhooks')).body[0]?.id}`, { method: 'DELETE' });
    }
  });

  it('retries an e-mail while the mail server is down and sends it once when it is back; the log shows both', async () => {
    mail.setDown(true);
    const before = mail.messages().length;
    await publish('cabinet-04', 'thermal', 'cabinet-thermal', 1400, [{ kind: 'noise', factor: 3, when: { fromSeq: 1001 } }]);
    const alert = await firstAlertOf('cabinet-04', 'thermal');
    const failing = await waitFor('a failed attempt in the log', async () => {
      const { body } = await api(service.url, admin, '/deliveries?channel=email&status=pending');
      return body.items.find((d: { alertIds: number[]; lastError: string | null }) => d.alertIds.includes(alert.id) && d.lastError);
    });
    expect(failing.lastError).toMatch(/421|refus|unavailable|closed/i);
    expect(mail.messages().length).toBe(before);
    mail.setDown(false);
    const page = await mail.waitFor((m) => mentions(m, alert.id), 30_000);
    expect(page.to).toEqual([RESPONDER]);
    const sent = await waitFor('the delivery marked sent', async () => {
      const { body } = await api(service.url, admin, `/deliveries?channel=email&status=sent`);
      return body.items.find((d: { id: number }) => d.id === failing.id);
    });
    expect(sent.attempts).toBeGreaterThanOrEqual(2);
    await new Promise((r) => setTimeout(r, 1500));
    expect(mailsTo(RESPONDER, alert.id)).toHaveLength(1);
  });
});
