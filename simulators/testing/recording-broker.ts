// Starts simulators/testing/recording-broker-process.mjs in a child process and collects what it receives.
import { spawn, type ChildProcess } from 'node:child_process';
import path from 'node:path';
import readline from 'node:readline';

export interface ReceivedMessage {
  /** The username the publishing client signed in with. */
  unit: string;
  topic: string;
  payload: string;
}

export interface RecordingBroker {
  url: string;
  /** What arrived since the start or the last clear(). */
  messages: ReceivedMessage[];
  clear(): void;
  /** Resolves once at least n messages have arrived (rejects after timeoutMs). */
  waitFor(n: number, timeoutMs?: number): Promise<void>;
  stop(): Promise<void>;
}

export async function startRecordingBroker(credentials: Record<string, string>): Promise<RecordingBroker> {
  const child: ChildProcess = spawn(process.execPath, [path.join(__dirname, 'recording-broker-process.mjs')], {
    env: { ...process.env, WHITECAP_TEST_CREDENTIALS: JSON.stringify(credentials) },
    stdio: ['ignore', 'pipe', 'inherit'],
  });
  const messages: ReceivedMessage[] = [];
  let waiters: { n: number; resolve: () => void }[] = [];
  const lines = readline.createInterface({ input: child.stdout! });
  const port = await new Promise<number>((resolve, reject) => {
    child.once('exit', (code) => reject(new Error(`recording broker exited with ${code}`)));
    lines.on('line', (line) => {
      if (!line) return;
      let parsed: ReceivedMessage | { port: number };
      try {
        parsed = JSON.parse(line) as ReceivedMessage | { port: number };
      } catch {
        throw new Error(`the recording broker wrote a line that is not JSON: ${line.slice(0, 200)}`);
      }
      if ('port' in parsed) {
        resolve(parsed.port);
        return;
      }
      messages.push(parsed);
      waiters = waiters.filter((w) => {
        if (messages.length < w.n) return true;
        w.resolve();
        return false;
      });
    });
  });
  return {
    url: `mqtt://127.0.0.1:${port}`,
    messages,
    clear: () => {
      messages.length = 0;
    },
    waitFor: (n, timeoutMs = 10_000) =>
      messages.length >= n
        ? Promise.resolve()
        : new Promise<void>((resolve, reject) => {
            const timer = setTimeout(
              () => reject(new Error(`only ${messages.length} of ${n} messages arrived within ${timeoutMs} ms`)),
              timeoutMs,
            );
            waiters.push({
              n,
              resolve: () => {
                clearTimeout(timer);
                resolve();
              },
            });
          }),
    stop: () =>
      new Promise<void>((resolve) => {
        if (child.exitCode !== null) return resolve();
        child.once('exit', () => resolve());
        child.kill('SIGTERM');
      }),
  };
}
