// Storage for the ingest pipeline: every accepted innovation sample (time-partitioned,
// a partition per day, created by the service ahead of time), minute rollups, each
// estimator's current status and checkpointed check state, and the quarantine.
import type { Knex } from 'knex';

export async function up(knex: Knex): Promise<void> {
  // One row per accepted sample, narrow on purpose (see README, bytes per stored sample):
  // fixed-width columns first and widest first (no alignment padding), seq as int4 (the
  // payload caps it at 2^31 − 1; units wrap to 0), nu and w as little-endian float32.
  // The primary key (estimator, seq, t) deduplicates resent samples; its entries are 24
  // bytes, 8 fewer than (estimator, t, seq) would be (no padding after the int4s).
  await knex.raw(`
    create table innovation_samples (
      t timestamptz not null,
      estimator_id integer not null,
      seq integer not null,
      nis real not null,
      cusum_up real not null,
      cusum_down real not null,
      nu bytea not null,
      w bytea not null,
      primary key (estimator_id, seq, t)
    ) partition by range (t)
  `);

  await knex.schema.createTable('estimator_rollups_minute', (t) => {
    t.integer('estimator_id').notNullable().references('estimators.id').onDelete('CASCADE');
    t.timestamp('minute', { useTz: true }).notNullable();
    t.integer('samples').notNullable();
    t.double('nis_sum').notNullable();
    t.specificType('nis_min', 'real').notNullable();
    t.specificType('nis_max', 'real').notNullable();
    t.integer('exceedances').notNullable();
    t.specificType('cusum_up_max', 'real').notNullable();
    t.specificType('cusum_down_max', 'real').notNullable();
    t.text('verdict').notNullable();
    t.primary(['estimator_id', 'minute']);
  });
  await knex.raw('create index estimator_rollups_minute_minute on estimator_rollups_minute (minute)');

  await knex.schema.createTable('estimator_status', (t) => {
    t.integer('estimator_id').primary().references('estimators.id').onDelete('CASCADE');
    t.text('verdict').notNullable().defaultTo('consistent');
    t.timestamp('verdict_since', { useTz: true }).notNullable().defaultTo(knex.fn.now());
    t.timestamp('last_sample_at', { useTz: true });
    t.timestamp('last_received_at', { useTz: true });
    t.bigInteger('last_seq');
    t.bigInteger('samples_total').notNullable().defaultTo(0);
    t.jsonb('window').notNullable().defaultTo('{}');
    t.timestamp('updated_at', { useTz: true }).notNullable().defaultTo(knex.fn.now());
  });

  await knex.schema.createTable('estimator_checkpoints', (t) => {
    t.integer('estimator_id').primary().references('estimators.id').onDelete('CASCADE');
    t.jsonb('state').notNullable();
    t.bigInteger('samples_seen').notNullable();
    t.timestamp('saved_at', { useTz: true }).notNullable().defaultTo(knex.fn.now());
  });

  await knex.schema.createTable('quarantine', (t) => {
    t.bigIncrements('id');
    t.timestamp('received_at', { useTz: true }).notNullable().defaultTo(knex.fn.now());
    t.text('unit_key');
    t.text('estimator_key');
    t.integer('estimator_id').references('estimators.id').onDelete('SET NULL');
    t.text('topic').notNullable();
    t.text('reason_code').notNullable();
    t.text('reason').notNullable();
    t.binary('payload').notNullable();
    t.integer('payload_bytes').notNullable();
    t.integer('sample_index');
  });
  await knex.raw('create index quarantine_received_at on quarantine (received_at desc)');
  await knex.raw('create index quarantine_unit on quarantine (unit_key, received_at desc)');
}

export async function down(knex: Knex): Promise<void> {
  await knex.schema.dropTableIfExists('quarantine');
  await knex.schema.dropTableIfExists('estimator_checkpoints');
  await knex.schema.dropTableIfExists('estimator_status');
  await knex.schema.dropTableIfExists('estimator_rollups_minute');
  await knex.raw('drop table if exists innovation_samples cascade');
}
