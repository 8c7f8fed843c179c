// What `npm start` and `npm test` share: installing what is missing and running the
// project's TypeScript entry points. Node built-ins only.
import { spawn, spawnSync } from 'node:child_process';
import fs from 'node:fs';
import path from 'node:path';
import { createRequire } from 'node:module';
import { fileURLToPath } from 'node:url';

export const root = path.resolve(path.dirname(fileURLToPath(import.meta.url)), '../..');
export const requireFromProject = createRequire(path.join(root, 'package.json'));
export const bin = (name) => path.join(root, 'node_modules', '.bin', name);
/**
 * Arguments that run a TypeScript entry point in this very process tree:
 * `node --import tsx file` (the tsx CLI would run it in a grandchild that signals miss).
 */
export const tsNode = (file, args = [], nodeFlags = []) => [process.execPath, [...nodeFlags, '--import', 'tsx', file, ...args]];
/**
 * Node flags for the ingest service: none at present. A 64 MB young generation once
 * helped (the per-estimator report of every rules look was kept until the next one, so
 * it outlived a small nursery); since the service no longer keeps it, Node's default
 * (16 MB semi-spaces) gives shorter scavenge pauses. Measured with
 * `npm run bench:ingest -- --batch 10 --duration 75` at 20,000 samples/s, one run each
 * (runs vary by a few hundred ms): scavenges of 64 MB took 26 ms median and up to 107 ms;
 * with the default, publish-to-commit p99 709 ms against 865–1327 ms, GC 3.9 s against
 * 4.4–5.7 s, mean RSS 407 MB against 477 MB.
 * `npm run bench:ingest -- --node-flag …` tries others.
 */
export const SERVICE_NODE_FLAGS = [];

/** Installs the npm dependencies when node_modules is missing or older than the lock file. */
export function ensureDependencies(log = console.log) {
  const marker = path.join(root, 'node_modules', '.package-lock.json');
  const lock = path.join(root, 'package-lock.json');
  const stale =
    !fs.existsSync(marker) || (fs.existsSync(lock) && fs.statSync(lock).mtimeMs > fs.statSync(marker).mtimeMs + 1000);
  if (!stale) return;
  log('installing npm dependencies (first run)…');
  const args = fs.existsSync(lock) ? ['ci', '--no-audit', '--no-fund'] : ['install', '--no-audit', '--no-fund'];
  const r = spawnSync('npm', args, { cwd: root, stdio: 'inherit' });
  if (r.status !== 0) throw new Error(`npm ${args[0]} failed`);
}

/** Runs a TypeScript entry point with tsx and waits for it; throws on a non-zero exit. */
export function runTs(file, args = [], env = {}) {
  const [node, nodeArgs] = tsNode(file, args);
  const r = spawnSync(node, nodeArgs, { cwd: root, stdio: 'inherit', env: { ...process.env, ...env } });
  if (r.status !== 0) throw new Error(`${file} ${args.join(' ')} exited with ${r.status ?? r.signal}`);
}

/** Starts a long-running child that shares our output. */
export function startChild(command, args, env = {}, opts = {}) {
  return spawn(command, args, { cwd: root, stdio: 'inherit', env: { ...process.env, ...env }, ...opts });
}

/** Newest modification time of the files below `dir` (ignores missing folders). */
export function newestMtime(...dirs) {
  let newest = 0;
  const walk = (d) => {
    if (!fs.existsSync(d)) return;
    for (const entry of fs.readdirSync(d, { withFileTypes: true })) {
      const p = path.join(d, entry.name);
      if (entry.isDirectory()) walk(p);
      else newest = Math.max(newest, fs.statSync(p).mtimeMs);
    }
  };
  for (const d of dirs) {
    if (fs.existsSync(d) && fs.statSync(d).isFile()) newest = Math.max(newest, fs.statSync(d).mtimeMs);
    else walk(d);
  }
  return newest;
}

/** Builds the dashboard when its build is missing or older than its sources. */
export function ensureDashboardBuilt(log = console.log, { force = false } = {}) {
  const out = path.join(root, 'dist', 'dashboard', 'browser', 'index.html');
  const sources = newestMtime(
    path.join(root, 'dashboard'),
    path.join(root, 'shared', 'src'),
    path.join(root, 'angular.json'),
    path.join(root, 'package-lock.json'),
  );
  if (!force && fs.existsSync(out) && fs.statSync(out).mtimeMs > sources) return;
  log('building the dashboard…');
  const r = spawnSync(bin('ng'), ['build', '--configuration', 'production'], {
    cwd: root,
    stdio: 'inherit',
    env: { ...process.env, NG_CLI_ANALYTICS: 'false' },
  });
  if (r.status !== 0) throw new Error('dashboard build failed');
}

export function waitForHttp(url, timeoutMs = 60_000) {
  const deadline = Date.now() + timeoutMs;
  return new Promise((resolve, reject) => {
    const attempt = async () => {
      try {
        const res = await fetch(url);
        if (res.status < 500 || res.status === 503) return resolve(res.status);
      } catch {
        /* not up yet */
      }
      if (Date.now() > deadline) return reject(new Error(`${url} did not answer within ${timeoutMs} ms`));
      setTimeout(attempt, 300);
    };
    attempt();
  });
}

/**
 * Debian packages a run needs, installed with apt-get when `binary` is missing (as root;
 * otherwise an error that says what to install). `what` says who needs them.
 */
export function ensureDebianPackages(binary, packages, what, log = console.log) {
  if (fs.existsSync(binary)) return;
  if (process.getuid?.() !== 0) {
    throw new Error(`${binary} is missing (${what} use it): sudo apt-get install -y ${packages.join(' ')}`);
  }
  log(`installing Debian's ${packages.join(', ')} for ${what} (apt-get)…`);
  const env = { ...process.env, DEBIAN_FRONTEND: 'noninteractive' };
  if (spawnSync('apt-get', ['update'], { stdio: 'inherit', env }).status !== 0) throw new Error('apt-get update failed');
  const r = spawnSync('apt-get', ['install', '-y', '--no-install-recommends', ...packages], { stdio: 'inherit', env });
  if (r.status !== 0) throw new Error(`apt-get install ${packages.join(' ')} failed`);
}

/** Debian's mosquitto, the external broker of the faults tests and bench:partitioned. */
export function ensureMosquitto(log = console.log) {
  ensureDebianPackages('/usr/sbin/mosquitto', ['mosquitto'], 'the faults tests and bench:partitioned', log);
}
