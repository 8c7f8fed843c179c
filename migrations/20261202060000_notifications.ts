// The notification side: who is on watch (rotas and their overrides), what pages
// (rules per severity), the paging of each alert and its handoffs, single-use
// acknowledge links, webhook endpoints, and every message or call as a delivery
// with its outcome (an outbox: written first, sent and retried by the dispatcher).
import type { Knex } from 'knex';

export async function up(knex: Knex): Promise<void> {
  await knex.schema.createTable('watch_rotas', (t) => {
    t.increments('id');
    t.text('name').notNullable();
    t.integer('site_id').references('sites.id').onDelete('CASCADE');
    t.text('time_zone').notNullable();
    // [{ weekday: 1–7, handover: 'HH:MM', userId }]
    t.jsonb('shifts').notNullable();
    // [userId, …] in order
    t.jsonb('backups').notNullable().defaultTo('[]');
    t.timestamp('created_at', { useTz: true }).notNullable().defaultTo(knex.fn.now());
    t.timestamp('updated_at', { useTz: true }).notNullable().defaultTo(knex.fn.now());
  });
  // One rota for the whole fleet and at most one per site.
  await knex.raw('create unique index watch_rotas_one_per_scope on watch_rotas (coalesce(site_id, 0))');

  await knex.schema.createTable('watch_overrides', (t) => {
    t.increments('id');
    t.integer('rota_id').notNullable().references('watch_rotas.id').onDelete('CASCADE');
    t.integer('user_id').notNullable().references('users.id').onDelete('CASCADE');
    t.timestamp('from_at', { useTz: true }).notNullable();
    t.timestamp('to_at', { useTz: true }).notNullable();
    t.text('note');
    t.integer('created_by').references('users.id').onDelete('SET NULL');
    t.timestamp('created_at', { useTz: true }).notNullable().defaultTo(knex.fn.now());
    t.check('to_at > from_at', [], 'watch_overrides_range');
  });
  await knex.raw('create index watch_overrides_rota_to on watch_overrides (rota_id, to_at)');

  await knex.schema.createTable('notification_rules', (t) => {
    t.text('severity').primary();
    t.boolean('pages').notNullable();
    t.integer('handoff_after_seconds').notNullable().defaultTo(600);
    t.text('quiet_from');
    t.text('quiet_to');
    t.check(`severity in ('info', 'warning', 'critical')`, [], 'notification_rules_severity_known');
    t.check('handoff_after_seconds between 5 and 86400', [], 'notification_rules_handoff_range');
    t.check('(quiet_from is null) = (quiet_to is null)', [], 'notification_rules_quiet_both');
  });
  await knex('notification_rules').insert([
    { severity: 'critical', pages: true, handoff_after_seconds: 600, quiet_from: null, quiet_to: null },
    { severity: 'warning', pages: true, handoff_after_seconds: 600, quiet_from: '22:00', quiet_to: '07:00' },
    { severity: 'info', pages: false, handoff_after_seconds: 1800, quiet_from: null, quiet_to: null },
  ]);

  // The paging of one alert: who is in line, how far it has gone, when the next handoff is due.
  await knex.schema.createTable('alert_paging', (t) => {
    t.bigInteger('alert_id').primary().references('alerts.id').onDelete('CASCADE');
    t.integer('rota_id').references('watch_rotas.id').onDelete('SET NULL');
    // User ids in paging order: on watch, then the backups; the last step is everyone in it.
    t.jsonb('chain').notNullable();
    t.integer('step').notNullable().defaultTo(0);
    t.integer('handoff_after_ms').notNullable();
    t.timestamp('paged_at', { useTz: true }).notNullable();
    t.timestamp('next_handoff_at', { useTz: true });
  });
  await knex.raw('create index alert_paging_due on alert_paging (next_handoff_at) where next_handoff_at is not null');

  await knex.schema.createTable('ack_links', (t) => {
    t.text('nonce').primary();
    t.bigInteger('alert_id').notNullable().references('alerts.id').onDelete('CASCADE');
    t.integer('user_id').notNullable().references('users.id').onDelete('CASCADE');
    t.timestamp('expires_at', { useTz: true }).notNullable();
    t.timestamp('used_at', { useTz: true });
    t.timestamp('created_at', { useTz: true }).notNullable().defaultTo(knex.fn.now());
  });

  await knex.schema.createTable('webhook_endpoints', (t) => {
    t.increments('id');
    t.text('url').notNullable().unique();
    t.text('description').notNullable().defaultTo('');
    t.text('secret').notNullable();
    t.boolean('active').notNullable().defaultTo(true);
    t.integer('created_by').references('users.id').onDelete('SET NULL');
    t.timestamp('created_at', { useTz: true }).notNullable().defaultTo(knex.fn.now());
  });

  await knex.schema.createTable('deliveries', (t) => {
    t.bigIncrements('id');
    t.text('channel').notNullable();
    t.text('target').notNullable();
    t.integer('user_id').references('users.id').onDelete('SET NULL');
    t.integer('endpoint_id').references('webhook_endpoints.id').onDelete('CASCADE');
    t.text('subject').notNullable();
    // E-mail: { to, subject, text, html }; webhook: { body } (the exact JSON text that is signed).
    t.jsonb('content').notNullable();
    t.jsonb('alert_ids').notNullable().defaultTo('[]');
    t.text('status').notNullable().defaultTo('pending');
    t.integer('attempts').notNullable().defaultTo(0);
    t.text('last_error');
    t.timestamp('created_at', { useTz: true }).notNullable().defaultTo(knex.fn.now());
    t.timestamp('next_attempt_at', { useTz: true }).defaultTo(knex.fn.now());
    t.timestamp('sent_at', { useTz: true });
    t.check(`channel in ('email', 'webhook')`, [], 'deliveries_channel_known');
    t.check(`status in ('pending', 'sending', 'sent', 'failed')`, [], 'deliveries_status_known');
  });
  await knex.raw(`create index deliveries_due on deliveries (next_attempt_at) where status = 'pending'`);
  await knex.raw('create index deliveries_created on deliveries (created_at desc)');
}

export async function down(knex: Knex): Promise<void> {
  for (const table of ['deliveries', 'webhook_endpoints', 'ack_links', 'alert_paging', 'notification_rules', 'watch_overrides', 'watch_rotas']) {
    await knex.schema.dropTableIfExists(table);
  }
}
