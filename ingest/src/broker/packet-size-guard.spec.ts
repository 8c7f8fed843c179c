import { remainingLength } from '../../../test/support/mqtt-raw';
import { MqttFrameWatcher } from './packet-size-guard';

/** A QoS 1 PUBLISH packet (MQTT 3.1.1 §3.3) with a payload of `payloadBytes`. */
function publish(payloadBytes: number, messageId = 1): Buffer {
  const topic = Buffer.from('whitecap/v1/units/u/estimators/e/innovations');
  const variable = Buffer.concat([Buffer.from([topic.length >> 8, topic.length & 0xff]), topic, Buffer.from([messageId >> 8, messageId & 0xff])]);
  const body = Buffer.concat([variable, Buffer.alloc(payloadBytes, 0x61)]);
  return Buffer.concat([Buffer.from([0x32]), remainingLength(body.length), body]);
}
const pingreq = () => Buffer.from([0xc0, 0x00]);

/** Feeds `bytes` in chunks of `size`; returns what the watcher reported, or null. */
function feed(watcher: MqttFrameWatcher, bytes: Buffer, size: number): number | null {
  for (let i = 0; i < bytes.length; i += size) {
    const over = watcher.push(bytes.subarray(i, i + size));
    if (over !== null) return over;
  }
  return null;
}

describe('MqttFrameWatcher', () => {
  it.each([1, 2, 3, 7, 64, 100_000])('follows packets of every size across chunks of %i bytes and lets those within the bound pass', (size) => {
    const stream = Buffer.concat([publish(0), pingreq(), publish(127 - 48), publish(300), publish(16_384), pingreq(), publish(60_000, 2)]);
    expect(feed(new MqttFrameWatcher(70_000), stream, size)).toBeNull();
  });

  it.each([1, 5, 4096])('reports a packet over the bound from its header, in chunks of %i bytes', (size) => {
    const big = publish(200_000);
    const stream = Buffer.concat([publish(10), pingreq(), big, publish(10)]);
    const over = feed(new MqttFrameWatcher(100_000), stream, size);
    expect(over).toBe(big.length - 1 - 3); // remaining length: the packet less its type byte and 3 length bytes
  });

  it('reports before the body arrives: the first bytes of the header are enough', () => {
    const big = publish(5_000_000);
    const w = new MqttFrameWatcher(1_000_000);
    expect(w.push(big.subarray(0, 5))).toBe(big.length - 1 - 4);
  });

  it('reports a declared length near the MQTT maximum (268,435,455) without any body', () => {
    const header = Buffer.from([0x30, 0xff, 0xff, 0xff, 0x7f]);
    expect(new MqttFrameWatcher(1_000_000).push(header)).toBe(268_435_455);
  });

  it('counts exactly at the bound: equal passes, one more is reported', () => {
    const p = publish(1000);
    const remaining = p.length - 1 - 2;
    expect(feed(new MqttFrameWatcher(remaining), p, 10)).toBeNull();
    expect(feed(new MqttFrameWatcher(remaining - 1), p, 10)).toBe(remaining);
  });

  it('stops looking after a malformed length (five length bytes) rather than guessing', () => {
    const w = new MqttFrameWatcher(10);
    expect(w.push(Buffer.from([0x30, 0x80, 0x80, 0x80, 0x80, 0x01]))).toBeNull();
    expect(w.push(Buffer.alloc(100, 0xff))).toBeNull();
  });
});
