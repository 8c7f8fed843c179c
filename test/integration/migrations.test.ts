import knexFactory, { type Knex } from 'knex';
import { migrationConfig } from '../../ingest/src/db/knex';
import { createTestDatabase, type TestDatabase } from '../support/database';

async function userTables(knex: Knex): Promise<string[]> {
  const rows = await knex('information_schema.tables')
    .where({ table_schema: 'public' })
    .whereNotIn('table_name', ['knex_migrations', 'knex_migrations_lock'])
    .orderBy('table_name')
    .pluck('table_name');
  return rows as string[];
}

jest.setTimeout(60_000);

describe('migrations', () => {
  let db: TestDatabase;
  let knex: Knex;

  beforeAll(async () => {
    db = await createTestDatabase('migrations', { empty: true });
    knex = knexFactory({ client: 'pg', connection: db.url, migrations: migrationConfig() });
  });
  afterAll(async () => {
    await knex?.destroy();
    await db?.drop();
  });

  it('run up on an empty database, down to nothing, and up again', async () => {
    expect(await userTables(knex)).toEqual([]);

    const [, applied] = await knex.migrate.latest();
    expect(applied.length).toBeGreaterThan(0);
    const tables = await userTables(knex);
    expect(tables).toEqual(expect.arrayContaining(['users', 'sites', 'units', 'estimators', 'design_revisions']));

    const [, undone] = await knex.migrate.rollback(undefined, true);
    expect(undone).toHaveLength(applied.length);
    expect(await userTables(knex)).toEqual([]);

    await knex.migrate.latest();
    expect(await userTables(knex)).toEqual(tables);
    const [, pending] = await knex.migrate.list();
    expect(pending).toEqual([]);
  });
});
