// Columns the fleet screens sort and screen by, kept beside the window summary so that
// a fleet of 10,000 estimators is read without opening 10,000 JSON documents.
import type { Knex } from 'knex';

export async function up(knex: Knex): Promise<void> {
  await knex.schema.alterTable('estimator_status', (t) => {
    t.double('p_value');
    t.specificType('nis_ratio', 'real');
  });
}

export async function down(knex: Knex): Promise<void> {
  await knex.schema.alterTable('estimator_status', (t) => {
    t.dropColumn('p_value');
    t.dropColumn('nis_ratio');
  });
}
