// Storm control with the real database and the real SMTP fake: 200 alerts within a
// minute (a site loses power, a rollout goes wrong) give each person on watch one
// message at once and one grouped summary, not 200 e-mails. The notification side runs
// in this process (so the test can raise 200 alerts at once); everything it talks to is real.
import knexFactory, { type Knex } from 'knex';
import { MailCatcher } from '../../ingest/src/dev/mail-catcher';
import { ServiceEvents } from '../../ingest/src/events';
import { createLogger } from '../../ingest/src/logger';
import { Dispatcher } from '../../ingest/src/notify/dispatcher';
import { Notifier } from '../../ingest/src/notify/notifier';
import { NotifyRepository } from '../../ingest/src/notify/notify-repository';
import { createTestDatabase, type TestDatabase } from '../support/database';
import { runCli } from '../support/service';

jest.setTimeout(120_000);

const RULES = ['nis-window', 'cusum-drift', 'whiteness', 'bias'] as const;

describe('notifications: storm control', () => {
  let db: TestDatabase;
  let knex: Knex;
  let mail: MailCatcher;

  beforeAll(async () => {
    db = await createTestDatabase('notifications_storm');
    await runCli('ingest/cli/seed.ts', [], { WHITECAP_DATABASE_URL: db.url });
    knex = knexFactory({ client: 'pg', connection: db.url, pool: { min: 0, max: 5 } });
    mail = await MailCatcher.start({ httpPort: null });
  });
  afterAll(async () => {
    await mail?.stop();
    await knex?.destroy();
    await db?.drop();
  });

  it('turns 200 alerts within a minute into one page and one grouped message per person on watch', async () => {
    await knex('notification_rules').update({ quiet_from: null, quiet_to: null, pages: true });
    // North Yard has its own rota (the administrator); the rest of the fleet the demo's (the responder).
    const admin = await knex('users').where({ email: 'admin@saltmarsh.example' }).first('id');
    const north = await knex('sites').where({ key: 'north-yard' }).first('id');
    await knex('watch_rotas').insert({
      name: 'North Yard watch',
      site_id: north.id,
      time_zone: 'Europe/Amsterdam',
      shifts: JSON.stringify([{ weekday: 1, handover: '00:00', userId: admin.id }]),
      backups: JSON.stringify([]),
    });

    const repo = new NotifyRepository(knex);
    const events = new ServiceEvents();
    const logger = createLogger('silent');
    const notifier = new Notifier(
      { repo, events, clock: { now: () => Date.now() }, logger },
      { baseUrl: 'http://127.0.0.1:8610', linkSecret: 'storm-test-link-secret-0123456789abcdef', ackLinkTtlMs: 3_600_000, stormWindowMs: 4_000 },
    );
    notifier.start();
    const dispatcher = new Dispatcher(repo, logger, {
      smtp: { host: '127.0.0.1', port: mail.smtpPort, secure: false, user: null, password: null },
      mailFrom: 'Whitecap <whitecap@localhost>',
      maxAttempts: 5,
      webhookTimeoutMs: 2000,
    });

    // 200 live alerts: 50 estimators × 4 rules, opened within a few seconds.
    const estimators = await knex('estimators as e')
      .join('units as u', 'u.id', 'e.unit_id')
      .join('sites as s', 's.id', 'u.site_id')
      .orderBy('e.id')
      .limit(50)
      .select('e.id', 'e.unit_id', 's.key as site');
    const rows = estimators.flatMap((e) =>
      RULES.map((rule) => ({
        estimator_id: e.id,
        rule,
        severity: rule === 'bias' ? 'warning' : 'critical',
        state: 'open',
        summary: `${rule} out of bounds (storm test)`,
        evidence: JSON.stringify({ check: rule, pValue: 1e-9 }),
        opened_at: new Date(),
        last_evidence_at: new Date(),
      })),
    );
    const inserted = await knex('alerts').insert(rows).returning(['id', 'estimator_id', 'rule']);
    expect(inserted).toHaveLength(200);
    const northIds = new Set(estimators.filter((e) => e.site === 'north-yard').map((e) => Number(e.id)));
    const forAdmin = inserted.filter((a) => northIds.has(Number(a.estimator_id))).length;
    const forResponder = 200 - forAdmin;
    expect(forAdmin).toBeGreaterThan(1);
    expect(forResponder).toBeGreaterThan(1);

    const started = Date.now();
    for (const a of inserted) {
      events.emit('alert', { kind: 'open', estimatorId: Number(a.estimator_id), unitId: null, rule: a.rule, severity: 'critical', atMs: Date.now() });
    }
    await notifier.idle();
    // Every window opened by now, so every window has closed 4 s (the window) from now.
    // Run the service's timers by hand until then and until the outbox is empty.
    const addsDone = Date.now();
    while (Date.now() - addsDone < 4_500 || (await knex('deliveries').whereNot({ status: 'sent' }).first('id'))) {
      await notifier.sweep();
      await dispatcher.runOnce(100);
      await new Promise((r) => setTimeout(r, 200));
      if (Date.now() - started > 60_000) throw new Error('deliveries did not all go out within a minute');
    }
    await notifier.stop();
    await dispatcher.runOnce(100);
    dispatcher.close();

    const to = (email: string) => mail.messages().filter((m) => m.to.includes(email));
    const responderMail = to('responder@saltmarsh.example');
    const adminMail = to('admin@saltmarsh.example');
    expect(mail.messages()).toHaveLength(4);
    for (const [mails, count] of [
      [responderMail, forResponder],
      [adminMail, forAdmin],
    ] as const) {
      expect(mails).toHaveLength(2);
      // The first alert alone, at once; the rest of the window in one summary.
      expect(mails[0].subject).not.toMatch(/alerts in/);
      expect(mails[1].subject).toMatch(new RegExp(`\\b${count - 1} alerts in`));
      expect(mails[1].text).toMatch(/By site/);
      expect(mails[1].text).toMatch(/By design revision/);
    }
    // Every alert was paged (its trail says so), though the people got two messages each.
    const paged = await knex('alert_events').where({ kind: 'paged' }).count<{ count: string }[]>('* as count');
    expect(Number(paged[0].count)).toBe(200);
    const sent = await knex('deliveries').where({ channel: 'email', status: 'sent' }).count<{ count: string }[]>('* as count');
    expect(Number(sent[0].count)).toBe(4);
  });
});
