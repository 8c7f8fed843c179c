// `npm test`: every suite, from a fresh clone. Starts a throwaway PostgreSQL cluster on
// loopback, migrates a template database that the integration tests clone, type-checks,
// builds the dashboard for the browser tests, runs every jest project, and stops what it
// started. Extra arguments go to jest (e.g. `npm test -- --selectProjects shared`).
import { spawnSync } from 'node:child_process';
import fs from 'node:fs';
import os from 'node:os';
import path from 'node:path';
import { LocalPostgres, freePort } from './lib/postgres.mjs';
import { bin, tsNode, ensureDashboardBuilt, ensureDebianPackages, ensureDependencies, ensureMosquitto, requireFromProject, root } from './lib/project.mjs';

const log = (msg) => console.log(`[test] ${msg}`);
// `npm test -- --quick …`: skip the type-check and the dashboard build (for quick local runs; CI never passes it).
const quick = process.argv.includes('--quick');
const jestArgs = process.argv.slice(2).filter((a) => a !== '--quick');

function ensureChromium() {
  ensureDebianPackages('/usr/bin/chromium', ['chromium', 'fonts-dejavu-core'], 'the browser tests', log);
}

function typecheck() {
  for (const project of ['shared/tsconfig.json', 'ingest/tsconfig.json', 'dashboard/tsconfig.app.json', 'test/tsconfig.json', 'ingest/bench/tsconfig.json']) {
    if (!fs.existsSync(path.join(root, project))) continue;
    const r = spawnSync(bin('tsc'), ['-p', project, '--noEmit'], { cwd: root, stdio: 'inherit' });
    if (r.status !== 0) throw new Error(`type errors in ${project}`);
  }
}

async function main() {
  ensureDependencies(log);
  ensureChromium();
  // The faults suite runs Debian's mosquitto on loopback as an external broker (its own
  // port and configuration; a system mosquitto on 1883, if the package started one, is not used).
  ensureMosquitto(log);
  if (!quick) {
    typecheck();
    ensureDashboardBuilt(log);
  }

  const pgRoot = fs.mkdtempSync(path.join(os.tmpdir(), 'whitecap-test-pg-'));
  const port = Number(process.env.WHITECAP_TEST_PG_PORT ?? (await freePort()));
  const postgres = new LocalPostgres({
    root: pgRoot,
    port,
    database: 'whitecap_template',
    // A throwaway cluster: durability is not what is under test here.
    settings: { fsync: 'off', full_page_writes: 'off', synchronous_commit: 'off', max_connections: 200 },
    log,
  });
  let status = 1;
  try {
    postgres.init();
    await postgres.start();
    await postgres.ensureDatabase(requireFromProject);
    log(`throwaway PostgreSQL on 127.0.0.1:${port}`);
    const env = {
      ...process.env,
      WHITECAP_TEST_ADMIN_URL: postgres.adminUrl,
      WHITECAP_TEST_TEMPLATE_DB: 'whitecap_template',
      WHITECAP_DATABASE_URL: postgres.url,
      WHITECAP_LOG_LEVEL: process.env.WHITECAP_LOG_LEVEL ?? 'warn',
    };
    const migrate = spawnSync(...tsNode('ingest/cli/migrate.ts', ['latest']), { cwd: root, stdio: 'inherit', env });
    if (migrate.status !== 0) throw new Error('migrations failed');
    const args = ['--ci', ...jestArgs];
    const jest = spawnSync(bin('jest'), args, { cwd: root, stdio: 'inherit', env });
    status = jest.status ?? 1;
  } catch (err) {
    console.error(`[test] ${err.message}`);
    status = 1;
  } finally {
    try {
      postgres.stop('immediate');
    } catch {
      /* already down */
    }
    fs.rmSync(pgRoot, { recursive: true, force: true });
  }
  process.exit(status);
}

main();
