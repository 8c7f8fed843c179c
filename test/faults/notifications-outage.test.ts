// The mail relay (the local SMTP fake) and a webhook receiver are both down for a minute
// (nothing listens on their ports) while alerts are raised and resolved. The dispatcher
// keeps retrying with its backoff, capped by WHITECAP_DELIVERY_RETRY_MAX_MS; once both
// are back every e-mail and every webhook call of the outbox arrives, each exactly once.
import http from 'node:http';
import knexFactory, { type Knex } from 'knex';
import { demoDeviceSecret } from '../../ingest/src/demo/saltmarsh';
import { MailCatcher } from '../../ingest/src/dev/mail-catcher';
import { verifyWebhook, WEBHOOK_SIGNATURE_HEADER } from '../../ingest/src/notify/signing';
import { publishSamples } from '../../simulators/src/index';
import { api, signIn, type Session } from '../support/api';
import { createTestDatabase, type TestDatabase } from '../support/database';
import { freePort, runCli, startService, type ServiceHandle } from '../support/service';
import { sleep, waitFor } from '../support/watch';

jest.setTimeout(180_000);

const DOWN_MS = 60_000;
const RETRY_MAX_MS = 5000;
const LINK_SECRET = 'faults-link-secret-0123456789abcdef012345';

interface Call {
  delivery: string;
  event: string;
  verified: boolean;
}

/** A webhook receiver on a fixed port that can be taken down (port closed) and brought back. */
class Receiver {
  readonly calls: Call[] = [];
  secret = '';
  private server: http.Server | null = null;
  constructor(readonly port: number) {}

  async up(): Promise<void> {
    const server = http.createServer((req, res) => {
      let body = '';
      req.on('data', (c) => (body += c));
      req.on('end', () => {
        const signature = String(req.headers[WEBHOOK_SIGNATURE_HEADER.toLowerCase()] ?? '');
        this.calls.push({
          delivery: String(req.headers['whitecap-delivery']),
          event: String(req.headers['whitecap-event']),
          verified: verifyWebhook(this.secret, signature, body, Math.floor(Date.now() / 1000)).ok,
        });
        res.statusCode = 204;
        res.end();
      });
    });
    await new Promise<void>((resolve, reject) => {
      server.once('error', reject);
      server.listen(this.port, '127.0.0.1', () => resolve());
    });
    this.server = server;
  }

  async down(): Promise<void> {
    const server = this.server;
    this.server = null;
    if (!server) return;
    await new Promise<void>((resolve) => {
      server.close(() => resolve());
      server.closeAllConnections();
    });
  }
}

describe('faults: the mail relay and a webhook receiver are down for a minute', () => {
  let db: TestDatabase;
  let knex: Knex;
  let mail: MailCatcher | null = null;
  let receiver: Receiver;
  let service: ServiceHandle | null = null;
  let admin: Session;

  beforeAll(async () => {
    db = await createTestDatabase('faults_notify');
    await runCli('ingest/cli/seed.ts', [], { WHITECAP_DATABASE_URL: db.url });
    knex = knexFactory({ client: 'pg', connection: db.url, pool: { min: 0, max: 2 } });
    receiver = new Receiver(await freePort());
  });
  afterAll(async () => {
    await service?.stop();
    await mail?.stop();
    await receiver?.down();
    await knex?.destroy();
    await db?.drop();
  });

  it('sends every e-mail and webhook call once both are back, none twice', async () => {
    mail = await MailCatcher.start({ httpPort: null });
    const smtpPort = mail.smtpPort;
    await receiver.up();
    service = await startService({
      WHITECAP_DATABASE_URL: db.url,
      WHITECAP_SMTP_PORT: String(smtpPort),
      WHITECAP_LINK_SECRET: LINK_SECRET,
      WHITECAP_DISPATCH_EVERY_MS: '200',
      WHITECAP_NOTIFY_SWEEP_MS: '250',
      WHITECAP_STORM_WINDOW_MS: '2000',
      WHITECAP_STATUS_EVERY_MS: '100',
      WHITECAP_SWEEP_EVERY_MS: '100',
      WHITECAP_DELIVERY_RETRY_MAX_MS: String(RETRY_MAX_MS),
      WHITECAP_DELIVERY_MAX_ATTEMPTS: '40',
    });
    admin = await signIn(service.url, 'admin@saltmarsh.example', 'saltmarsh-admin');
    // Quiet hours would make the test depend on the time of day it runs.
    for (const severity of ['critical', 'warning']) {
      expect((await api(service.url, admin, `/notification-rules/${severity}`, { method: 'PATCH', body: { quietFrom: null, quietTo: null } })).status).toBe(200);
    }
    const created = await api(service.url, admin, '/webhooks', { method: 'POST', body: { url: `http://127.0.0.1:${receiver.port}/hook`, description: 'faults receiver' } });
    expect(created.status).toBe(201);
    receiver.secret = created.body.secret;

    // Both down: nothing listens on either port.
    await mail.stop();
    mail = null;
    await receiver.down();
    const downAt = Date.now();

    // Alerts while they are down: three cabinets go noisy, and an admin resolves an alert.
    await Promise.all(
      ['cabinet-02', 'cabinet-03', 'cabinet-04'].map((unit, i) =>
        publishSamples({
          url: `mqtt://127.0.0.1:${service!.mqttPort}`,
          unit,
          secret: demoDeviceSecret(unit),
          estimator: 'thermal',
          kind: 'cabinet-thermal',
          count: 1400,
          faults: [{ kind: 'noise', factor: 3, when: { fromSeq: 1001 } }],
          clock: 'model',
          batchSize: 50,
          seed: 30 + i,
        }),
      ),
    );
    const open = await waitFor('an alert on a noisy cabinet', () =>
      knex('alerts as a').join('estimators as e', 'e.id', 'a.estimator_id').join('units as u', 'u.id', 'e.unit_id').where({ 'u.key': 'cabinet-02' }).first('a.id').then((r) => r as { id: number } | undefined),
    );
    expect((await api(service.url, admin, `/alerts/${open.id}/resolve`, { method: 'POST', body: { note: 'cabinet fan replaced' } })).status).toBe(200);

    // Both channels have failed deliveries waiting; none is given up while they are down.
    const pendingOf = async (channel: string) => knex('deliveries').where({ channel }).whereNotNull('last_error').count<{ count: string }[]>('* as count');
    await waitFor('failed e-mails and webhook calls', async () => Number((await pendingOf('email'))[0].count) > 0 && Number((await pendingOf('webhook'))[0].count) > 0, 30_000);
    let maxAttemptsWhileDown = 0;
    while (Date.now() < downAt + DOWN_MS) {
      const rows = await knex('deliveries').select('status', 'attempts');
      expect(rows.filter((r) => r.status === 'sent' || r.status === 'failed')).toEqual([]);
      maxAttemptsWhileDown = Math.max(maxAttemptsWhileDown, ...rows.map((r) => Number(r.attempts)));
      await sleep(2000);
    }
    const lastErrors = await knex('deliveries').whereNotNull('last_error').distinct('channel', 'last_error');
    // The delivery log says why: nobody listening.
    expect(new Set(lastErrors.map((e) => e.channel))).toEqual(new Set(['email', 'webhook']));
    expect(lastErrors.filter((e) => !/ECONNREFUSED/.test(e.last_error))).toEqual([]);

    // Back, on the same ports.
    mail = await MailCatcher.start({ httpPort: null, smtpPort });
    await receiver.up();
    const upAt = Date.now();
    await waitFor(
      'every delivery sent',
      async () => {
        const rows = await knex('deliveries').select('status');
        return rows.length > 0 && rows.every((r) => r.status === 'sent');
      },
      RETRY_MAX_MS + 20_000,
      200,
    );
    const allSentInMs = Date.now() - upAt;
    // Nothing more arrives later (a second copy of anything).
    await sleep(2000);

    const deliveries = await knex('deliveries').orderBy('id').select('id', 'channel', 'attempts', 'created_at', 'status');
    const emails = deliveries.filter((d) => d.channel === 'email');
    const hooks = deliveries.filter((d) => d.channel === 'webhook');
    expect(emails.length).toBeGreaterThan(0);
    expect(hooks.length).toBeGreaterThan(0);

    const mailIds = mail.messages().map((m) => m.headers['x-whitecap-delivery']);
    expect([...mailIds].sort()).toEqual(emails.map((d) => String(d.id)).sort());
    const hookIds = receiver.calls.map((c) => c.delivery);
    expect([...hookIds].sort()).toEqual(hooks.map((d) => String(d.id)).sort());
    expect(receiver.calls.every((c) => c.verified)).toBe(true);
    // Made while both were down: tried and failed, then sent on a later try.
    const duringOutage = deliveries.filter((d) => new Date(d.created_at).getTime() >= downAt && new Date(d.created_at).getTime() < upAt);
    expect(duringOutage.filter((d) => d.channel === 'email').length).toBeGreaterThan(0);
    expect(duringOutage.filter((d) => d.channel === 'webhook').length).toBeGreaterThan(0);
    expect(duringOutage.filter((d) => Number(d.attempts) < 2)).toEqual([]);
    expect(maxAttemptsWhileDown).toBeGreaterThanOrEqual(8);
    // The backoff cap bounds the wait after they return.
    expect(allSentInMs).toBeLessThan(RETRY_MAX_MS + 5000);

    console.log(
      `[faults] SMTP and webhook receiver down ${Math.round((upAt - downAt) / 1000)} s: ${emails.length} e-mails and ${hooks.length} webhook calls, ` +
        `each delivered once, all within ${allSentInMs} ms of their return; up to ${Math.max(...deliveries.map((d) => Number(d.attempts)))} attempts; ` +
        `errors seen: ${lastErrors.map((e) => `${e.channel}: ${e.last_error}`).join(' | ')}`,
    );
  });
});
