// Retune studies: a designer's analysis of a window of field residuals (the request as
// sent, the result as computed), and the draft design revision made from one.
import type { Knex } from 'knex';

export async function up(knex: Knex): Promise<void> {
  await knex.schema.createTable('retune_studies', (t) => {
    t.increments('id');
    t.text('title').notNullable();
    t.integer('created_by').references('users.id').onDelete('SET NULL');
    t.timestamp('created_at', { useTz: true }).notNullable().defaultTo(knex.fn.now());
    t.jsonb('request').notNullable();
    t.jsonb('result').notNullable();
    t.integer('design_revision_id').notNullable().references('design_revisions.id').onDelete('CASCADE');
    t.integer('draft_revision_id').references('design_revisions.id').onDelete('SET NULL');
  });
  await knex.raw('create index retune_studies_created on retune_studies (created_at desc)');
  await knex.raw('create index retune_studies_revision on retune_studies (design_revision_id)');
}

export async function down(knex: Knex): Promise<void> {
  await knex.schema.dropTableIfExists('retune_studies');
}
