// Residual uploads: innovation files a designer logged on a bench run or a test drive,
// stored per design revision so a retune study can use them like field residuals.
import type { Knex } from 'knex';

export async function up(knex: Knex): Promise<void> {
  await knex.schema.createTable('residual_uploads', (t) => {
    t.increments('id');
    t.text('name').notNullable();
    t.integer('design_revision_id').notNullable().references('design_revisions.id').onDelete('CASCADE');
    t.integer('created_by').references('users.id').onDelete('SET NULL');
    t.timestamp('created_at', { useTz: true }).notNullable().defaultTo(knex.fn.now());
    t.integer('rows_accepted').notNullable().defaultTo(0);
    t.integer('rows_rejected').notNullable().defaultTo(0);
    // The first 100 rejected rows: [{ line, reason }]
    t.jsonb('report').notNullable().defaultTo('[]');
  });
  await knex.raw('create index residual_uploads_revision on residual_uploads (design_revision_id)');
  await knex.schema.createTable('residual_upload_samples', (t) => {
    t.integer('upload_id').notNullable().references('residual_uploads.id').onDelete('CASCADE');
    t.integer('seq').notNullable();
    t.timestamp('t', { useTz: true }).nullable();
    t.specificType('nu', 'real[]').notNullable();
    t.primary(['upload_id', 'seq']);
  });
}

export async function down(knex: Knex): Promise<void> {
  await knex.schema.dropTableIfExists('residual_upload_samples');
  await knex.schema.dropTableIfExists('residual_uploads');
}
