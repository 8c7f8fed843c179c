// MQTT packets written by hand, for what a well-behaved client library will not send:
// packets that declare hundreds of megabytes, CONNECTs in a tight loop. MQTT 3.1.1.
import net from 'node:net';
import fs from 'node:fs';
import mqtt from 'mqtt';

/** MQTT's variable-length "remaining length" (MQTT 3.1.1 §2.2.3). */
export function remainingLength(n: number): Buffer {
  const bytes: number[] = [];
  do {
    let b = n % 128;
    n = Math.floor(n / 128);
    if (n > 0) b |= 0x80;
    bytes.push(b);
  } while (n > 0);
  return Buffer.from(bytes);
}

function utf8Field(s: string | Buffer): Buffer {
  const b = Buffer.isBuffer(s) ? s : Buffer.from(s, 'utf8');
  return Buffer.concat([Buffer.from([b.length >> 8, b.length & 0xff]), b]);
}

/** A CONNECT packet (clean session, keep-alive 60 s). */
export function connectPacket(o: { clientId: string; username?: string; password?: string }): Buffer {
  const flags = 0x02 | (o.username !== undefined ? 0x80 : 0) | (o.password !== undefined ? 0x40 : 0);
  const variable = Buffer.concat([utf8Field('MQTT'), Buffer.from([4, flags, 0, 60])]);
  const payload = Buffer.concat([
    utf8Field(o.clientId),
    ...(o.username !== undefined ? [utf8Field(o.username)] : []),
    ...(o.password !== undefined ? [utf8Field(o.password)] : []),
  ]);
  const body = Buffer.concat([variable, payload]);
  return Buffer.concat([Buffer.from([0x10]), remainingLength(body.length), body]);
}

/** The fixed header of a packet of `type` (first byte) declaring `declared` bytes to follow. */
export function header(firstByte: number, declared: number): Buffer {
  return Buffer.concat([Buffer.from([firstByte]), remainingLength(declared)]);
}

/** The start of a QoS 1 PUBLISH whose payload is `payloadBytes` long: fixed header, topic, packet id. */
export function publishStart(topic: string, payloadBytes: number, messageId = 1): Buffer {
  const variable = Buffer.concat([utf8Field(topic), Buffer.from([messageId >> 8, messageId & 0xff])]);
  return Buffer.concat([header(0x32, variable.length + payloadBytes), variable]);
}

export interface StreamResult {
  /** Whether the server closed the connection. */
  closed: boolean;
  /** Bytes written before it did (or in all). */
  written: number;
  /** Milliseconds from the first byte to the close. */
  ms: number;
}

/**
 * Opens a TCP connection, writes `first`, then keeps writing `chunk` until `total` bytes
 * have gone or the server closes the connection (or `timeoutMs` passes).
 */
export function streamUntilClosed(port: number, first: Buffer, total: number, timeoutMs = 15_000, chunk = Buffer.alloc(256 * 1024, 0x61)): Promise<StreamResult> {
  return new Promise((resolve) => {
    const started = performance.now();
    const socket = net.connect(port, '127.0.0.1');
    let written = 0;
    let closed = false;
    let finished = false;
    const finish = () => {
      if (finished) return;
      finished = true;
      clearTimeout(timer);
      socket.destroy();
      resolve({ closed, written, ms: performance.now() - started });
    };
    const timer = setTimeout(finish, timeoutMs);
    socket.on('error', () => undefined);
    socket.on('close', () => {
      closed = true;
      finish();
    });
    socket.on('connect', () => {
      socket.write(first);
      written += first.length;
      const pump = () => {
        while (!closed && written < total) {
          const part = total - written < chunk.length ? chunk.subarray(0, total - written) : chunk;
          written += part.length;
          if (!socket.write(part)) {
            socket.once('drain', pump);
            return;
          }
        }
        if (written >= total) setTimeout(finish, 2000); // all sent: give the server a moment to close
      };
      pump();
    });
  });
}

/** Resident memory of a process, in bytes (Linux). */
export function rssOf(pid: number): number {
  const m = /VmRSS:\s+(\d+) kB/.exec(fs.readFileSync(`/proc/${pid}/status`, 'utf8'));
  return m ? Number(m[1]) * 1024 : Number.NaN;
}

/** One connection attempt: 0 when accepted (and closed again at once), else the CONNACK return code (or -1 for another failure). */
export function tryConnect(port: number, username: string, password: string, clientId: string): Promise<number> {
  return new Promise((resolve) => {
    const client = mqtt.connect(`mqtt://127.0.0.1:${port}`, { username, password, clientId, reconnectPeriod: 0, connectTimeout: 5000 });
    let done = false;
    const settle = (code: number) => {
      if (done) return;
      done = true;
      client.end(true, {}, () => resolve(code));
    };
    client.once('connect', () => settle(0));
    client.once('error', (err: Error & { code?: unknown }) => settle(typeof err.code === 'number' ? err.code : -1));
    client.once('close', () => settle(-1));
  });
}
