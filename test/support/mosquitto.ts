// Debian's mosquitto on loopback, as the external broker of fault tests: its own folder
// (configuration, persistence, log) and a free port, never the system's 1883 or its
// /etc/mosquitto configuration. `npm test` installs the package when it is missing.
//
// mosquitto 2.0's defaults drop QoS 1 messages for a subscriber that falls behind
// (max_inflight_messages 20, max_queued_messages 1000) and say so only in a notice in
// its log: both are raised here, and `droppedMessages()` reads the log for such notices.
import { spawn, execFileSync, type ChildProcess } from 'node:child_process';
import fs from 'node:fs';
import net from 'node:net';
import os from 'node:os';
import path from 'node:path';
import { freePort } from './service';

export const MOSQUITTO = '/usr/sbin/mosquitto';

export class Mosquitto {
  private child: ChildProcess | null = null;
  private output = '';

  private constructor(
    readonly dir: string,
    readonly port: number,
  ) {}

  get url(): string {
    return `mqtt://127.0.0.1:${this.port}`;
  }

  /** The running broker's process id (null while stopped). */
  get pid(): number | null {
    return this.child?.pid ?? null;
  }

  get logFile(): string {
    return path.join(this.dir, 'mosquitto.log');
  }

  /** Starts a broker with persistence (its sessions and queued messages survive a clean restart). */
  static async start(prefix = 'faults'): Promise<Mosquitto> {
    if (!fs.existsSync(MOSQUITTO)) throw new Error(`${MOSQUITTO} is missing: npm test installs Debian's mosquitto (apt-get install mosquitto)`);
    const dir = fs.mkdtempSync(path.join(os.tmpdir(), `whitecap-${prefix}-mosquitto-`));
    const broker = new Mosquitto(dir, await freePort());
    fs.writeFileSync(
      path.join(dir, 'mosquitto.conf'),
      [
        `listener ${broker.port} 127.0.0.1`,
        // Units sign in to the service's own broker; on this test broker anyone on loopback may publish.
        'allow_anonymous true',
        'persistence true',
        `persistence_location ${dir}/`,
        `log_dest file ${broker.logFile}`,
        'log_type error',
        'log_type warning',
        'log_type notice',
        'log_type information',
        'connection_messages true',
        'max_inflight_messages 1000',
        'max_queued_messages 1000000',
        'max_queued_bytes 0',
        '',
      ].join('\n'),
    );
    // As root mosquitto drops to its own user, which must be able to write its folder.
    if (process.getuid?.() === 0) {
      fs.chmodSync(dir, 0o755);
      try {
        execFileSync('chown', ['-R', 'mosquitto', dir]);
      } catch {
        /* no mosquitto user: it keeps running as root */
      }
    }
    await broker.run();
    return broker;
  }

  /**
   * Stops it and starts it again on the same port. By default cleanly (SIGTERM: it saves
   * its sessions, subscriptions and queued messages); with `forget`, killed and started
   * without its saved state, as a broker that lost its disk: every client must subscribe again.
   */
  async restart(opts: { downMs?: number; forget?: boolean } = {}): Promise<void> {
    await this.stop(opts.forget ? 'SIGKILL' : 'SIGTERM');
    if (opts.forget) fs.rmSync(path.join(this.dir, 'mosquitto.db'), { force: true });
    if (opts.downMs) await new Promise((r) => setTimeout(r, opts.downMs));
    await this.run();
  }

  async stop(signal: NodeJS.Signals = 'SIGTERM'): Promise<void> {
    const child = this.child;
    if (!child || child.exitCode !== null || child.signalCode !== null) return;
    await new Promise<void>((resolve) => {
      child.once('exit', () => resolve());
      child.kill(signal);
    });
    this.child = null;
  }

  log(): string {
    try {
      return fs.readFileSync(this.logFile, 'utf8');
    } catch {
      return '';
    }
  }

  /** Log lines that say mosquitto dropped or refused messages. */
  droppedMessages(): string[] {
    return this.log()
      .split('\n')
      .filter((l) => /dropp|discard|exceed|queue full/i.test(l));
  }

  async destroy(): Promise<void> {
    await this.stop();
    fs.rmSync(this.dir, { recursive: true, force: true });
  }

  private async run(): Promise<void> {
    const child = spawn(MOSQUITTO, ['-c', path.join(this.dir, 'mosquitto.conf')], { stdio: ['ignore', 'pipe', 'pipe'] });
    child.stdout?.on('data', (d) => (this.output += d));
    child.stderr?.on('data', (d) => (this.output += d));
    this.child = child;
    const deadline = Date.now() + 10_000;
    while (!(await listening(this.port))) {
      if (child.exitCode !== null) throw new Error(`mosquitto exited with ${child.exitCode}:\n${this.output}\n${this.log()}`);
      if (Date.now() > deadline) throw new Error(`mosquitto did not listen on ${this.port} within 10 s:\n${this.output}\n${this.log()}`);
      await new Promise((r) => setTimeout(r, 50));
    }
  }
}

function listening(port: number): Promise<boolean> {
  return new Promise((resolve) => {
    const socket = net.connect({ port, host: '127.0.0.1' });
    socket.once('connect', () => {
      socket.destroy();
      resolve(true);
    });
    socket.once('error', () => resolve(false));
  });
}
