// Each test file gets its own database, cloned from the migrated template that
// `npm test` prepares in its throwaway cluster.
import { randomBytes } from 'node:crypto';
import knexFactory, { type Knex } from 'knex';

function env(name: string): string {
  const v = process.env[name];
  if (!v) throw new Error(`${name} is not set: run the suites with npm test, which starts PostgreSQL`);
  return v;
}

function admin(): Knex {
  return knexFactory({ client: 'pg', connection: env('WHITECAP_TEST_ADMIN_URL'), pool: { min: 0, max: 1 } });
}

export function databaseUrl(name: string): string {
  const url = new URL(env('WHITECAP_TEST_ADMIN_URL'));
  url.pathname = `/${name}`;
  return url.toString();
}

export interface TestDatabase {
  name: string;
  url: string;
  drop(): Promise<void>;
}

/** A new database: a copy of the migrated template, or empty with `{ empty: true }`. */
export async function createTestDatabase(prefix: string, opts: { empty?: boolean } = {}): Promise<TestDatabase> {
  const name = `${prefix.replace(/[^a-z0-9_]/g, '_')}_${randomBytes(4).toString('hex')}`;
  const k = admin();
  try {
    // Identifiers cannot be bound; both names are made here from [a-z0-9_].
    const template = opts.empty ? 'template0' : env('WHITECAP_TEST_TEMPLATE_DB');
    await k.raw(`create database ${name} template ${template}`);
  } finally {
    await k.destroy();
  }
  return {
    name,
    url: databaseUrl(name),
    async drop() {
      const k2 = admin();
      try {
        await k2.raw(`drop database if exists ${name} with (force)`);
      } finally {
        await k2.destroy();
      }
    },
  };
}
