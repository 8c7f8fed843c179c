import { ServiceEvents } from '../events';
import { LiveBroadcaster } from './live-broadcaster';

function client(full = false) {
  const chunks: string[] = [];
  return { chunks, write: (c: string) => (chunks.push(c), !full) };
}

const verdict = (estimatorId: number) => ({ estimatorId, unitId: 1, verdict: 'marginal' as const, previous: 'consistent' as const, atMs: Date.UTC(2026, 11, 2, 8) });

describe('LiveBroadcaster', () => {
  it('gathers changes and writes them to every connection once per flush, in order, as server-sent events', () => {
    const events = new ServiceEvents();
    const live = new LiveBroadcaster(events, { flushMs: 60_000 });
    const [a, b] = [client(), client()];
    live.add(a);
    live.add(b);
    for (let id = 1; id <= 300; id++) events.emit('verdict', verdict(id));
    events.emit('alert', { kind: 'open', estimatorId: 7, unitId: 1, rule: 'nis-window', severity: 'critical', summary: 'NIS high', atMs: Date.UTC(2026, 11, 2, 8) });
    expect(a.chunks).toEqual([]);
    live.flush();
    expect(a.chunks).toHaveLength(1);
    expect(b.chunks).toEqual(a.chunks);
    const frames = a.chunks[0].split('\n\n').filter(Boolean);
    expect(frames).toHaveLength(301);
    expect(frames[0]).toBe('event: verdict\ndata: {"estimatorId":1,"verdict":"marginal","previous":"consistent","at":"2026-12-02T08:00:00.000Z"}');
    expect(frames[299]).toContain('"estimatorId":300');
    expect(JSON.parse(frames[300].split('data: ')[1])).toMatchObject({ kind: 'open', estimatorId: 7, rule: 'nis-window', severity: 'critical', alertId: null });
    expect(live.counts).toEqual({ frames: 301, writes: 2 });
  });

  it('flushes by itself after flushMs', async () => {
    const events = new ServiceEvents();
    const live = new LiveBroadcaster(events, { flushMs: 20 });
    const a = client();
    live.add(a);
    events.emit('verdict', verdict(1));
    await new Promise((r) => setTimeout(r, 80));
    expect(a.chunks).toHaveLength(1);
  });

  it('stops listening when the last connection goes, and skips a connection that does not read', () => {
    const events = new ServiceEvents();
    const live = new LiveBroadcaster(events, { flushMs: 60_000 });
    const slow = Object.assign(client(true), { writableNeedDrain: true });
    const fine = client();
    const removeSlow = live.add(slow);
    const removeFine = live.add(fine);
    expect(events.listenerCount('verdict')).toBe(1);
    events.emit('verdict', verdict(1));
    live.flush();
    events.emit('verdict', verdict(2));
    live.flush();
    expect(slow.chunks).toHaveLength(1); // its buffer stayed full: the second batch was not queued for it
    expect(fine.chunks).toHaveLength(2);
    removeSlow();
    removeFine();
    expect(live.size).toBe(0);
    expect(events.listenerCount('verdict')).toBe(0);
    expect(events.listenerCount('alert')).toBe(0);
  });
});
