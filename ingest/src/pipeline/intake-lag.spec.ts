import { IntakeLag } from './intake-lag';

describe('IntakeLag', () => {
  it('is 0 with no messages, or only old ones', () => {
    const lag = new IntakeLag(16, 10_000);
    expect(lag.lagMs(1_000_000)).toBe(0);
    lag.note(1_000_000 - 5000, 1_000_000);
    expect(lag.lagMs(1_000_000)).toBe(5000);
    expect(lag.lagMs(1_000_000 + 10_001)).toBe(0);
  });

  it('is not moved by units replaying an old backlog, even when they are most of the messages', () => {
    const lag = new IntakeLag(64);
    const now = 1_500_000;
    // One unit dumps 150 s of buffered samples in four messages while nothing else is sent.
    for (const age of [150_000, 100_000, 50_000, 0]) lag.note(now - age, now);
    expect(lag.lagMs(now)).toBe(0);
    // The fleet 0.4 s late, and a replaying unit's 40 old messages besides.
    for (let i = 0; i < 20; i++) lag.note(now - 400, now);
    for (let i = 0; i < 40; i++) lag.note(now - 3_600_000, now);
    expect(lag.lagMs(now)).toBe(400);
  });

  it('follows the fleet, not a few units with clocks off or replaying old samples', () => {
    const lag = new IntakeLag(64);
    const now = 2_000_000;
    for (let i = 0; i < 40; i++) lag.note(now - 300, now); // the fleet: 0.3 s late
    for (let i = 0; i < 10; i++) lag.note(now - 3_600_000, now); // a unit replaying an hour-old backlog
    for (let i = 0; i < 5; i++) lag.note(now + 120_000, now); // a clock two minutes ahead
    expect(lag.lagMs(now)).toBe(300);
  });

  it('grows when the whole fleet arrives late, and forgets the oldest beyond its capacity', () => {
    const lag = new IntakeLag(8);
    let now = 3_000_000;
    for (let i = 0; i < 8; i++) lag.note(now - 100, now);
    expect(lag.lagMs(now)).toBe(100);
    now += 1000;
    for (let i = 0; i < 8; i++) lag.note(now - 25_000, now); // a backlog: every message 25 s late
    expect(lag.lagMs(now)).toBe(25_000);
  });

  it('ignores a message without a usable sample time, and never goes below 0', () => {
    const lag = new IntakeLag(8);
    lag.note(Number.NaN, 1000);
    expect(lag.lagMs(1000)).toBe(0);
    lag.note(5000, 1000); // every sample ahead of the service clock
    expect(lag.lagMs(1000)).toBe(0);
  });
});
