// npm run seed: the demo scenario (Saltmarsh Terminal). Idempotent.
import { loadConfig } from '../src/config';
import { createKnex } from '../src/db/knex';
import { seedDemo } from '../src/demo/seed-demo';

async function main(): Promise<void> {
  const config = loadConfig();
  const knex = createKnex(config.database.url, 2);
  try {
    const counts = await seedDemo(knex, config.partitions.count);
    console.log(`demo seeded: ${counts.users} users, ${counts.units} units, ${counts.estimators} estimators`);
  } finally {
    await knex.destroy();
  }
}

main().catch((err) => {
  console.error(err instanceof Error ? err.message : err);
  process.exit(1);
});
