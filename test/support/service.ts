// Starts the real service (tsx ingest/main.ts) as a child process on free ports.
import { spawn, type ChildProcess } from 'node:child_process';
import net from 'node:net';
import path from 'node:path';

export const projectRoot = path.resolve(__dirname, '../..');

export function freePort(): Promise<number> {
  return new Promise((resolve, reject) => {
    const srv = net.createServer();
    srv.on('error', reject);
    srv.listen(0, '127.0.0.1', () => {
      const address = srv.address();
      const port = typeof address === 'object' && address ? address.port : 0;
      srv.close(() => resolve(port));
    });
  });
}

export interface ServiceHandle {
  url: string;
  httpPort: number;
  mqttPort: number;
  process: ChildProcess;
  output(): string;
  stop(signal?: NodeJS.Signals): Promise<number | null>;
}

export async function startService(env: Record<string, string>, timeoutMs = 30_000): Promise<ServiceHandle> {
  const httpPort = await freePort();
  const mqttPort = await freePort();
  // `node --import tsx` rather than the tsx CLI: the CLI runs the program in a grandchild
  // process that a signal to the CLI would leave behind.
  const child = spawn(process.execPath, ['--import', 'tsx', 'ingest/main.ts'], {
    cwd: projectRoot,
    env: {
      ...process.env,
      WHITECAP_HTTP_PORT: String(httpPort),
      WHITECAP_MQTT_PORT: String(mqttPort),
      WHITECAP_LOG_LEVEL: 'warn',
      // Mail goes nowhere unless a test starts its own SMTP fake (never to one npm start runs).
      WHITECAP_SMTP_PORT: String(await freePort()),
      ...env,
    },
    stdio: ['ignore', 'pipe', 'pipe'],
  });
  let out = '';
  child.stdout?.on('data', (d) => (out += d));
  child.stderr?.on('data', (d) => (out += d));
  const url = `http://127.0.0.1:${httpPort}`;
  const deadline = Date.now() + timeoutMs;
  while (true) {
    if (child.exitCode !== null) throw new Error(`service exited with ${child.exitCode}:\n${out}`);
    try {
      const res = await fetch(`${url}/api/health`);
      if (res.status === 200 || res.status === 503) break;
    } catch {
      /* not listening yet */
    }
    if (Date.now() > deadline) {
      child.kill('SIGKILL');
      throw new Error(`service did not answer within ${timeoutMs} ms:\n${out}`);
    }
    await new Promise((r) => setTimeout(r, 200));
  }
  return {
    url,
    httpPort,
    mqttPort,
    process: child,
    output: () => out,
    stop: (signal = 'SIGTERM') =>
      new Promise((resolve) => {
        if (child.exitCode !== null) return resolve(child.exitCode);
        child.once('exit', (code) => resolve(code));
        child.kill(signal);
      }),
  };
}

/** Runs a project CLI (migrate, seed) against a database and waits for it. */
export function runCli(file: string, args: string[], env: Record<string, string>): Promise<string> {
  return new Promise((resolve, reject) => {
    const child = spawn(process.execPath, ['--import', 'tsx', file, ...args], {
      cwd: projectRoot,
      env: { ...process.env, ...env },
      stdio: ['ignore', 'pipe', 'pipe'],
    });
    let out = '';
    child.stdout.on('data', (d) => (out += d));
    child.stderr.on('data', (d) => (out += d));
    child.on('exit', (code) => (code === 0 ? resolve(out) : reject(new Error(`${file} exited ${code}: ${out}`))));
  });
}
