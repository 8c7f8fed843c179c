// How late messages reach the checks: the service's time at the check minus the time of
// the newest sample in the message. A unit's quiet seen by the service is longer than
// its real quiet by this lag (sockets not yet read while the service is busy, messages
// held by the broker while the write queue is full), so silence waits for it too.
// Estimated by a low quantile (the 10th percentile) of the last messages' lags: every
// live unit's messages are late by at least the service's own delay, while a unit
// replaying an old backlog only adds large lags, which a low quantile ignores however
// many there are; a unit whose clock runs ahead gives a lag below the truth, and up to a
// tenth of the messages can do so without moving it.
export class IntakeLag {
  private readonly lags: Float64Array;
  private readonly at: Float64Array;
  private next = 0;

  constructor(
    capacity = 256,
    /** Only messages taken within this long count. */
    private readonly horizonMs = 10_000,
  ) {
    this.lags = new Float64Array(capacity);
    this.at = new Float64Array(capacity).fill(Number.NEGATIVE_INFINITY);
  }

  /** A message taken at `nowMs` whose newest sample is stamped `newestSampleMs`. */
  note(newestSampleMs: number, nowMs: number): void {
    if (!Number.isFinite(newestSampleMs)) return;
    const i = this.next++ % this.lags.length;
    this.lags[i] = nowMs - newestSampleMs;
    this.at[i] = nowMs;
  }

  /** The lag (ms, at least 0): the 10th percentile over the messages taken in the horizon; 0 when there were none. */
  lagMs(nowMs: number): number {
    const recent: number[] = [];
    for (let i = 0; i < this.lags.length; i++) if (nowMs - this.at[i] <= this.horizonMs) recent.push(this.lags[i]);
    if (recent.length === 0) return 0;
    recent.sort((a, b) => a - b);
    return Math.max(0, recent[Math.floor(recent.length * 0.1)]);
  }
}
