// The fleet (sites, units, estimators and the designs they run), the people who use
// Whitecap, and the credentials units use to publish.
import type { Knex } from 'knex';

export async function up(knex: Knex): Promise<void> {
  await knex.schema.createTable('users', (t) => {
    t.increments('id');
    t.text('email').notNullable().unique();
    t.text('display_name').notNullable();
    t.text('role').notNullable();
    t.text('password_hash').notNullable();
    t.boolean('active').notNullable().defaultTo(true);
    t.timestamp('created_at', { useTz: true }).notNullable().defaultTo(knex.fn.now());
    t.check(`role in ('viewer', 'responder', 'designer', 'admin')`, [], 'users_role_known');
  });

  await knex.schema.createTable('sites', (t) => {
    t.increments('id');
    t.text('key').notNullable().unique();
    t.text('name').notNullable();
    t.text('time_zone').notNullable().defaultTo('UTC');
  });

  await knex.schema.createTable('designs', (t) => {
    t.increments('id');
    t.text('key').notNullable().unique();
    t.text('name').notNullable();
    t.text('description').notNullable().defaultTo('');
  });

  await knex.schema.createTable('design_revisions', (t) => {
    t.increments('id');
    t.integer('design_id').notNullable().references('designs.id').onDelete('CASCADE');
    t.integer('revision').notNullable();
    t.text('status').notNullable().defaultTo('released');
    t.integer('state_dim').notNullable();
    t.integer('measurement_dim').notNullable();
    t.jsonb('model').notNullable();
    t.text('notes').notNullable().defaultTo('');
    t.timestamp('created_at', { useTz: true }).notNullable().defaultTo(knex.fn.now());
    t.unique(['design_id', 'revision']);
    t.check(`status in ('draft', 'released', 'retired')`, [], 'design_revisions_status_known');
    t.check('measurement_dim between 1 and 16', [], 'design_revisions_measurement_dim_range');
  });

  await knex.schema.createTable('units', (t) => {
    t.increments('id');
    t.integer('site_id').notNullable().references('sites.id');
    t.text('key').notNullable().unique();
    t.text('name').notNullable();
    t.text('kind').notNullable();
    t.timestamp('created_at', { useTz: true }).notNullable().defaultTo(knex.fn.now());
  });

  await knex.schema.createTable('estimators', (t) => {
    t.increments('id');
    t.integer('unit_id').notNullable().references('units.id').onDelete('CASCADE');
    t.text('key').notNullable();
    t.integer('design_revision_id').notNullable().references('design_revisions.id');
    t.integer('measurement_dim').notNullable();
    t.integer('expected_interval_ms').notNullable().defaultTo(1000);
    t.timestamp('created_at', { useTz: true }).notNullable().defaultTo(knex.fn.now());
    t.unique(['unit_id', 'key']);
  });

  await knex.schema.createTable('device_credentials', (t) => {
    t.increments('id');
    t.integer('unit_id').notNullable().references('units.id').onDelete('CASCADE');
    t.text('username').notNullable().unique();
    t.text('secret_hash').notNullable();
    t.timestamp('created_at', { useTz: true }).notNullable().defaultTo(knex.fn.now());
    t.timestamp('revoked_at', { useTz: true });
  });
}

export async function down(knex: Knex): Promise<void> {
  for (const table of ['device_credentials', 'estimators', 'units', 'design_revisions', 'designs', 'sites', 'users']) {
    await knex.schema.dropTableIfExists(table);
  }
}
