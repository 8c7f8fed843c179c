// One place that builds the Knex instance and knows where the migrations live.
import path from 'node:path';
import knexFactory, { type Knex } from 'knex';
import pg from 'pg';

// node-postgres returns bigint (int8) as strings; our counts and sequence numbers fit a double.
pg.types.setTypeParser(pg.types.builtins.INT8, (v: string) => Number(v));

export const migrationsDirectory = path.resolve(__dirname, '../../../migrations');

export function migrationConfig(): Knex.MigratorConfig {
  return {
    directory: migrationsDirectory,
    tableName: 'knex_migrations',
    loadExtensions: ['.ts'],
    extension: 'ts',
  };
}

export function createKnex(url: string, poolMax = 10): Knex {
  return knexFactory({
    client: 'pg',
    connection: { connectionString: url, connectionTimeoutMillis: 5000 },
    pool: { min: 0, max: poolMax },
    acquireConnectionTimeout: 5000,
    migrations: migrationConfig(),
  });
}
