// Partitions of the fleet, for ingest workers that scale out behind an external broker
// (docs/scaling.md): each unit gets a partition number when it is provisioned and
// publishes under whitecap/v1/partitions/{p}/…; each partition is handled by one worker
// at a time, which holds a PostgreSQL session advisory lock on it.
//
// - units.partition: the unit's partition; existing units are given
//   unitPartition(key, 16) (16 is the default WHITECAP_PARTITIONS).
// - ingest_workers: one row per worker, refreshed every second (its heartbeat): which
//   partitions it holds and which database session holds its locks.
// - partition_claims: who held which partition when (claimed_at, released_at).
import type { Knex } from 'knex';
import { DEFAULT_PARTITIONS, unitPartition } from '../ingest/src/broker/topics';

export async function up(knex: Knex): Promise<void> {
  await knex.schema.alterTable('units', (t) => {
    t.smallint('partition').notNullable().defaultTo(0);
  });
  await knex.raw('alter table units add constraint units_partition_range check (partition >= 0)');
  const units = await knex('units').select<{ id: number; key: string }[]>('id', 'key');
  for (let i = 0; i < units.length; i += 1000) {
    const slice = units.slice(i, i + 1000);
    await knex.raw(
      `update units set partition = v.p
         from unnest(?::int[], ?::smallint[]) as v(id, p)
        where units.id = v.id`,
      [slice.map((u) => Number(u.id)), slice.map((u) => unitPartition(u.key, DEFAULT_PARTITIONS))],
    );
  }
  await knex.raw('create index units_partition on units (partition)');

  await knex.schema.createTable('ingest_workers', (t) => {
    t.text('worker_id').primary();
    t.timestamp('seen_at', { useTz: true }).notNullable().defaultTo(knex.fn.now());
    t.specificType('partitions', 'int[]').notNullable().defaultTo('{}');
    // The database session holding the worker's locks (pg_backend_pid) and when it started.
    t.integer('backend_pid');
    t.timestamp('started_at', { useTz: true }).notNullable().defaultTo(knex.fn.now());
  });

  await knex.schema.createTable('partition_claims', (t) => {
    t.bigIncrements('id');
    t.smallint('partition').notNullable();
    t.text('worker_id').notNullable();
    // One worker process's database session: a claim is closed by its holder, or by the
    // next holder when the last one died with its session.
    t.text('incarnation').notNullable();
    t.timestamp('claimed_at', { useTz: true }).notNullable();
    t.timestamp('released_at', { useTz: true });
    t.text('release_reason');
  });
  await knex.raw('create index partition_claims_open on partition_claims (partition) where released_at is null');
  await knex.raw('create index partition_claims_claimed_at on partition_claims (claimed_at)');
}

export async function down(knex: Knex): Promise<void> {
  await knex.schema.dropTableIfExists('partition_claims');
  await knex.schema.dropTableIfExists('ingest_workers');
  await knex.raw('drop index if exists units_partition');
  await knex.raw('alter table units drop constraint if exists units_partition_range');
  await knex.schema.alterTable('units', (t) => {
    t.dropColumn('partition');
  });
}
