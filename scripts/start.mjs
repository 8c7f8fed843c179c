// `npm start`: everything a newcomer needs, from a fresh clone, in one command.
// Installs what is missing, starts PostgreSQL on loopback, migrates, seeds the demo,
// builds the dashboard, starts the service (HTTP + MQTT broker) and the demo fleet
// simulator, and prints where to go. Ctrl-C stops everything it started.
import { spawnSync } from 'node:child_process';
import path from 'node:path';
import { LocalPostgres } from './lib/postgres.mjs';
import {
  ensureDashboardBuilt,
  ensureDependencies,
  requireFromProject,
  root,
  runTs,
  startChild,
  tsNode,
  SERVICE_NODE_FLAGS,
  waitForHttp,
} from './lib/project.mjs';

const log = (msg) => console.log(`[whitecap] ${msg}`);
const env = process.env;
const pgPort = Number(env.WHITECAP_PG_PORT ?? 5436);
const httpPort = Number(env.WHITECAP_HTTP_PORT ?? 8610);
const mqttPort = Number(env.WHITECAP_MQTT_PORT ?? 1886);
const mailSmtpPort = Number(env.WHITECAP_MAIL_CATCHER_SMTP_PORT ?? 1025);
const mailHttpPort = Number(env.WHITECAP_MAIL_CATCHER_HTTP_PORT ?? 8625);
// Without a configured relay, mail goes to the local stand-in that captures it.
const realRelay = Boolean(env.WHITECAP_SMTP_HOST);
for (const [name, value] of [
  ['WHITECAP_PG_PORT', pgPort],
  ['WHITECAP_HTTP_PORT', httpPort],
  ['WHITECAP_MQTT_PORT', mqttPort],
  ['WHITECAP_MAIL_CATCHER_SMTP_PORT', mailSmtpPort],
  ['WHITECAP_MAIL_CATCHER_HTTP_PORT', mailHttpPort],
]) {
  if (!Number.isInteger(value) || value < 1 || value > 65535) {
    console.error(`${name}=${JSON.stringify(env[name])}: must be a port number between 1 and 65535`);
    process.exit(2);
  }
}

const children = [];
let postgres = null;
let stopping = false;

function stopAll(code = 0) {
  if (stopping) return;
  stopping = true;
  log('stopping…');
  for (const child of children.reverse()) {
    if (child.exitCode === null) child.kill('SIGTERM');
  }
  const waitChildren = Promise.all(
    children.map((c) => (c.exitCode !== null ? null : new Promise((r) => c.once('exit', r)))),
  );
  const timeout = new Promise((r) => setTimeout(r, 10_000));
  Promise.race([waitChildren, timeout]).then(() => {
    for (const c of children) if (c.exitCode === null) c.kill('SIGKILL');
    if (postgres) {
      log('stopping PostgreSQL');
      try {
        postgres.stop('fast');
      } catch (err) {
        console.error(err.message);
      }
    }
    process.exit(code);
  });
}
process.on('SIGINT', () => stopAll(0));
process.on('SIGTERM', () => stopAll(0));
process.on('SIGHUP', () => stopAll(0));

async function main() {
  ensureDependencies(log);

  postgres = new LocalPostgres({ root: path.join(root, '.data', 'postgres'), port: pgPort, log });
  const created = postgres.init();
  await postgres.start();
  await postgres.ensureDatabase(requireFromProject);
  log(`PostgreSQL ${created ? 'created and ' : ''}running on 127.0.0.1:${pgPort} (data in .data/postgres)`);

  const serviceEnv = {
    WHITECAP_DATABASE_URL: env.WHITECAP_DATABASE_URL ?? postgres.url,
    WHITECAP_HTTP_PORT: String(httpPort),
    WHITECAP_MQTT_PORT: String(mqttPort),
  };
  if (!realRelay) {
    const catcher = startChild(...tsNode('ingest/cli/mail-catcher.ts'), {
      WHITECAP_MAIL_CATCHER_SMTP_PORT: String(mailSmtpPort),
      WHITECAP_MAIL_CATCHER_HTTP_PORT: String(mailHttpPort),
    });
    children.push(catcher);
    await waitForHttp(`http://127.0.0.1:${mailHttpPort}/api/messages`, 30_000);
    Object.assign(serviceEnv, { WHITECAP_SMTP_HOST: '127.0.0.1', WHITECAP_SMTP_PORT: String(mailSmtpPort) });
  }
  runTs('ingest/cli/migrate.ts', ['latest'], serviceEnv);
  runTs('ingest/cli/seed.ts', [], serviceEnv);
  // Read now, before anything is running, for the banner printed once the service answers.
  const signIns = spawnSync(...tsNode('ingest/cli/demo-sign-ins.ts'), { cwd: root, encoding: 'utf8' }).stdout.trimEnd();
  ensureDashboardBuilt(log);

  const service = startChild(...tsNode('ingest/main.ts', [], SERVICE_NODE_FLAGS), serviceEnv);
  children.push(service);
  service.on('exit', (code, signal) => {
    if (!stopping) {
      console.error(`[whitecap] the service stopped (${code ?? signal}); stopping the rest`);
      stopAll(1);
    }
  });
  const url = `http://127.0.0.1:${httpPort}`;
  await waitForHttp(`${url}/api/health`, 60_000);

  if (env.WHITECAP_SIMULATOR !== 'off') {
    const sim = startChild(...tsNode('simulators/fleet.ts'), { WHITECAP_MQTT_PORT: String(mqttPort) });
    children.push(sim);
  }

  console.log(
    [
      '',
      '  Whitecap is running.',
      `  Dashboard:   ${url}/`,
      `  Health:      ${url}/api/health`,
      `  MQTT broker: mqtt://127.0.0.1:${mqttPort} (units sign in with their own credentials)`,
      `  PostgreSQL:  127.0.0.1:${pgPort}`,
      realRelay
        ? `  Mail:        sent through ${env.WHITECAP_SMTP_HOST}:${env.WHITECAP_SMTP_PORT ?? 1025}`
        : `  Mail:        captured at http://127.0.0.1:${mailHttpPort}/ (the demo rota pages responder@saltmarsh.example)`,
      '',
      '  Demo sign-ins (Saltmarsh Terminal, invented demo data):',
      signIns,
      '',
      '  Ctrl-C stops everything, PostgreSQL included; the next npm start reuses the data.',
      '',
    ].join('\n'),
  );
}

main().catch((err) => {
  console.error(`[whitecap] npm start failed: ${err.message}`);
  stopAll(1);
});
