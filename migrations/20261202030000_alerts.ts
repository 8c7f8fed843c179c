// Alerts raised by the pipeline's rules, and their audit trail.
import type { Knex } from 'knex';

export async function up(knex: Knex): Promise<void> {
  await knex.schema.createTable('alerts', (t) => {
    t.bigIncrements('id');
    t.integer('estimator_id').references('estimators.id').onDelete('CASCADE');
    t.integer('unit_id').references('units.id').onDelete('CASCADE');
    t.text('rule').notNullable();
    t.text('severity').notNullable();
    t.text('state').notNullable().defaultTo('open');
    t.text('summary').notNullable();
    t.jsonb('evidence').notNullable();
    t.timestamp('opened_at', { useTz: true }).notNullable();
    t.timestamp('last_evidence_at', { useTz: true }).notNullable();
    t.timestamp('condition_cleared_at', { useTz: true });
    t.timestamp('acknowledged_at', { useTz: true });
    t.integer('acknowledged_by').references('users.id');
    t.timestamp('resolved_at', { useTz: true });
    t.integer('resolved_by').references('users.id');
    t.check(`state in ('open', 'acknowledged', 'resolved')`, [], 'alerts_state_known');
    t.check(`severity in ('info', 'warning', 'critical')`, [], 'alerts_severity_known');
  });
  // One live (not resolved) alert per estimator and rule.
  await knex.raw(
    `create unique index alerts_one_live_per_rule on alerts (coalesce(estimator_id, 0), coalesce(unit_id, 0), rule) where state <> 'resolved'`,
  );
  await knex.raw('create index alerts_state_opened on alerts (state, opened_at desc)');

  await knex.schema.createTable('alert_events', (t) => {
    t.bigIncrements('id');
    t.bigInteger('alert_id').notNullable().references('alerts.id').onDelete('CASCADE');
    t.timestamp('at', { useTz: true }).notNullable().defaultTo(knex.fn.now());
    t.text('kind').notNullable();
    t.integer('actor_user_id').references('users.id');
    t.text('note');
    t.jsonb('data');
  });
  await knex.raw('create index alert_events_alert on alert_events (alert_id, at)');
}

export async function down(knex: Knex): Promise<void> {
  await knex.schema.dropTableIfExists('alert_events');
  await knex.schema.dropTableIfExists('alerts');
}
