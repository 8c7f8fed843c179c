// What leaves a unit: the message faults (dropout, silence, duplicate, reorder,
// malformed) applied to the stream of innovation samples. Pure and seeded; the filter
// underneath keeps running, so a lost sample leaves a gap in the sequence numbers.
import { isActive, type ScheduledMessageFault } from './faults';
import { malformedKinds, malformedPayload, type MalformedKind } from './malformed';
import type { PayloadOptions, SimulatedSample } from './payload';
import { SeededRandom } from './random';

export type OutgoingMessage =
  | { kind: 'sample'; sample: SimulatedSample }
  | { kind: 'malformed'; malformed: MalformedKind; seq: number; payload: string };

export interface MessageShaperCounts {
  /** Samples never published (dropout, silence, replaced by a malformed payload). */
  withheld: number;
  duplicated: number;
  reordered: number;
  malformed: number;
}

export class MessageShaper {
  private readonly random: SeededRandom;
  private held: SimulatedSample | null = null;
  private readonly counts: MessageShaperCounts = { withheld: 0, duplicated: 0, reordered: 0, malformed: 0 };

  constructor(
    private readonly faults: readonly ScheduledMessageFault[],
    seed: number,
    private readonly payloadOptions: PayloadOptions = {},
  ) {
    this.random = new SeededRandom(seed);
  }

  /** Whether any fault is configured at all (the publisher skips the shaper when not). */
  get idle(): boolean {
    return this.faults.length === 0 && this.held === null;
  }

  stats(): MessageShaperCounts {
    return { ...this.counts };
  }

  /** The messages to publish, in order, for one new sample at elapsedS seconds after start. */
  shape(sample: SimulatedSample, elapsedS: number): OutgoingMessage[] {
    let dropout = 0;
    let duplicate = 0;
    let reorder = 0;
    let malformed = 0;
    let malformedChoice: readonly MalformedKind[] = malformedKinds;
    let silent = false;
    for (const f of this.faults) {
      if (!isActive(f.when, sample.seq, elapsedS)) continue;
      switch (f.kind) {
        case 'silence':
          silent = true;
          break;
        case 'dropout':
          dropout = Math.max(dropout, f.fraction);
          break;
        case 'duplicate':
          duplicate = Math.max(duplicate, f.fraction);
          break;
        case 'reorder':
          reorder = Math.max(reorder, f.fraction);
          break;
        case 'malformed':
          malformed = Math.max(malformed, f.fraction);
          if (f.kinds?.length) malformedChoice = f.kinds;
          break;
      }
    }

    if (silent) {
      // the unit goes quiet; what it was holding back goes out first
      this.counts.withheld += 1;
      return this.release();
    }
    // every draw happens on every sample so that one fault's schedule does not shift another's draws
    const lost = this.random.chance(dropout);
    const broken = this.random.chance(malformed);
    const brokenKind = malformedChoice[this.random.integer(malformedChoice.length)];
    const twice = this.random.chance(duplicate);
    const late = this.random.chance(reorder);

    if (lost) {
      this.counts.withheld += 1;
      return [];
    }
    if (broken) {
      this.counts.withheld += 1;
      this.counts.malformed += 1;
      const payload = malformedPayload(brokenKind, sample, this.random, this.payloadOptions);
      return [{ kind: 'malformed', malformed: brokenKind, seq: sample.seq, payload }, ...this.release()];
    }
    if (late && this.held === null) {
      // hold this one back; it goes out after the next sample
      this.held = sample;
      this.counts.reordered += 1;
      return [];
    }
    const out: OutgoingMessage[] = [{ kind: 'sample', sample }];
    if (twice) {
      this.counts.duplicated += 1;
      out.push({ kind: 'sample', sample });
    }
    return out.concat(this.release());
  }

  /** Whatever is still held back (at stop, or when the unit goes silent). */
  release(): OutgoingMessage[] {
    if (!this.held) return [];
    const sample = this.held;
    this.held = null;
    return [{ kind: 'sample', sample }];
  }
}
