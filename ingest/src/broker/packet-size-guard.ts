// The largest MQTT packet a connection may send. MQTT 3.1.1 lets a packet declare up to
// 256 MB (its "remaining length", MQTT 3.1.1 §2.2.3) and the broker's parser buffers a
// packet whole before anyone sees it, so without a bound a few connections could make the
// service hold gigabytes. The guard reads each packet's fixed header as the bytes go by
// and closes the connection as soon as a packet declares more than the bound: nothing of
// such a packet is kept, whether it is a PUBLISH or a CONNECT before any sign-in.
import type { Duplex } from 'node:stream';

/** Follows the packet boundaries of one MQTT byte stream (fixed headers only). */
export class MqttFrameWatcher {
  /** 0: expecting a packet's first byte; 1: reading its remaining length; 2: skipping its body. */
  private state = 0;
  private length = 0;
  private multiplier = 1;
  private lengthBytes = 0;
  private remaining = 0;
  private done = false;

  constructor(private readonly maxRemainingLength: number) {}

  /**
   * Reads a chunk; returns the declared remaining length of the first packet over the
   * bound, or null. After a packet over the bound, or a malformed length (which the
   * broker's own parser refuses), it stops looking.
   */
  push(chunk: Uint8Array): number | null {
    let i = 0;
    const n = chunk.length;
    while (i < n && !this.done) {
      if (this.state === 2) {
        const skip = Math.min(this.remaining, n - i);
        i += skip;
        this.remaining -= skip;
        if (this.remaining === 0) this.state = 0;
      } else if (this.state === 0) {
        i += 1; // packet type and flags
        this.state = 1;
        this.length = 0;
        this.multiplier = 1;
        this.lengthBytes = 0;
      } else {
        const byte = chunk[i++];
        this.length += (byte & 0x7f) * this.multiplier;
        this.multiplier *= 128;
        this.lengthBytes += 1;
        if ((byte & 0x80) === 0) {
          if (this.length > this.maxRemainingLength) {
            this.done = true;
            return this.length;
          }
          this.remaining = this.length;
          this.state = this.remaining === 0 ? 0 : 2;
        } else if (this.lengthBytes === 4) {
          this.done = true; // a fifth length byte: malformed, the parser will say so
        }
      }
    }
    return null;
  }
}

/**
 * Watches what the broker reads from `socket` and destroys the socket when a packet
 * declares more than `maxPacketBytes` (fixed header included). Call it after the broker
 * has attached its own reader: the watcher only listens to the bytes the broker reads
 * ('data' is emitted by each read() while a 'readable' listener drives the stream), so
 * it changes neither the flow nor the back-pressure.
 */
export function guardPacketSize(socket: Duplex, maxPacketBytes: number, onTooLarge: (declaredBytes: number) => void): void {
  // remaining length + 1 type byte + up to 4 length bytes ≤ maxPacketBytes
  const watcher = new MqttFrameWatcher(Math.max(0, maxPacketBytes - 5));
  const onData = (chunk: Buffer) => {
    const over = watcher.push(chunk);
    if (over === null) return;
    socket.off('data', onData);
    onTooLarge(over);
    socket.destroy();
  };
  socket.on('data', onData);
}
