// npm run migrate -- [latest|rollback-all|status]
import { loadConfig } from '../src/config';
import { createKnex } from '../src/db/knex';

async function main(): Promise<void> {
  const action = process.argv[2] ?? 'latest';
  const config = loadConfig();
  const knex = createKnex(config.database.url, 2);
  try {
    if (action === 'latest') {
      const [batch, applied] = await knex.migrate.latest();
      console.log(applied.length ? `migrated (batch ${batch}): ${applied.join(', ')}` : 'database schema is up to date');
    } else if (action === 'rollback-all') {
      const [, undone] = await knex.migrate.rollback(undefined, true);
      console.log(`rolled back: ${undone.join(', ') || 'nothing'}`);
    } else if (action === 'status') {
      const [done, pending] = await knex.migrate.list();
      console.log(`applied: ${done.length}, pending: ${pending.length}`);
    } else {
      throw new Error(`unknown action ${action}; use latest, rollback-all or status`);
    }
  } finally {
    await knex.destroy();
  }
}

main().catch((err) => {
  console.error(err instanceof Error ? err.message : err);
  process.exit(1);
});
