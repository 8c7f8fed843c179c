import type { ScheduledMessageFault } from './faults';
import { MessageShaper, type OutgoingMessage } from './message-faults';
import { malformedKinds } from './malformed';
import { PlantFilter } from './plant-filter';
import { plantDesign } from './plant-models';

/** Runs count samples of a thermal cabinet (sample k at k s) through the shaper. */
function shape(faults: ScheduledMessageFault[], count: number, seed = 3): { out: OutgoingMessage[]; shaper: MessageShaper } {
  const generator = new PlantFilter({ design: plantDesign('cabinet-thermal'), seed: 1, reference: false });
  const shaper = new MessageShaper(faults, seed);
  const out: OutgoingMessage[] = [];
  for (let k = 1; k <= count; k++) out.push(...shaper.shape(generator.next(), k));
  out.push(...shaper.release());
  return { out, shaper };
}

const seqs = (out: OutgoingMessage[]) => out.filter((m) => m.kind === 'sample').map((m) => (m.kind === 'sample' ? m.sample.seq : -1));
const within4Sigma = (observed: number, p: number, n: number) => Math.abs(observed - p) < 4 * Math.sqrt((p * (1 - p)) / n);

describe('MessageShaper', () => {
  const N = 20_000;

  it('passes every sample through, in order, when no fault is on', () => {
    const { out } = shape([{ kind: 'dropout', fraction: 0.5, when: { fromSeq: N + 1 } }], 1000);
    expect(seqs(out)).toEqual(Array.from({ length: 1000 }, (_, i) => i + 1));
  });

  it('drops a fraction of samples, leaving gaps in the sequence numbers', () => {
    const { out, shaper } = shape([{ kind: 'dropout', fraction: 0.1 }], N);
    const sent = seqs(out);
    expect(within4Sigma(1 - sent.length / N, 0.1, N)).toBe(true);
    expect(sent.every((s, i) => i === 0 || s > sent[i - 1])).toBe(true);
    const gaps = sent.reduce((g, s, i) => g + (i === 0 ? s - 1 : s - sent[i - 1] - 1), 0) + (N - sent.at(-1)!);
    expect(gaps).toBe(shaper.stats().withheld);
  });

  it('publishes a fraction of samples twice, one right after the other', () => {
    const { out, shaper } = shape([{ kind: 'duplicate', fraction: 0.05 }], N);
    const sent = seqs(out);
    const repeats = sent.filter((s, i) => i > 0 && s === sent[i - 1]).length;
    expect(repeats).toBe(shaper.stats().duplicated);
    expect(within4Sigma(repeats / N, 0.05, N)).toBe(true);
    expect(new Set(sent).size).toBe(N);
  });

  it('delivers a fraction of samples after their successor, losing none', () => {
    const { out, shaper } = shape([{ kind: 'reorder', fraction: 0.05 }], N);
    const sent = seqs(out);
    expect([...sent].sort((a, b) => a - b)).toEqual(Array.from({ length: N }, (_, i) => i + 1));
    const inversions = sent.filter((s, i) => i > 0 && s < sent[i - 1]);
    // each late sample arrives straight after the one that overtook it
    for (let i = 1; i < sent.length; i++) if (sent[i] < sent[i - 1]) expect(sent[i - 1] - sent[i]).toBe(1);
    expect(inversions.length).toBe(shaper.stats().reordered);
    // a sample is held only when none is held already: a little under 5 %
    expect(inversions.length / N).toBeGreaterThan(0.04);
    expect(inversions.length / N).toBeLessThan(0.05);
  });

  it('publishes nothing while silent and resumes with a gap', () => {
    const { out } = shape([{ kind: 'silence', when: { fromS: 100, toS: 200 } }], 300);
    const sent = seqs(out);
    expect(sent.filter((s) => s >= 100 && s < 200)).toEqual([]);
    expect(sent).toHaveLength(200);
    expect(sent.slice(98, 100)).toEqual([99, 200]);
  });

  it('replaces a fraction of samples with malformed payloads of every kind', () => {
    const { out, shaper } = shape([{ kind: 'malformed', fraction: 0.05 }], N);
    const bad = out.filter((m) => m.kind === 'malformed');
    expect(bad.length).toBe(shaper.stats().malformed);
    expect(within4Sigma(bad.length / N, 0.05, N)).toBe(true);
    expect(new Set(bad.map((m) => (m.kind === 'malformed' ? m.malformed : '')))).toEqual(new Set(malformedKinds));
    expect(seqs(out).length + bad.length).toBe(N);
  });

  it('keeps to the malformed kinds it is given', () => {
    const { out } = shape([{ kind: 'malformed', fraction: 0.2, kinds: ['not-finite'] }], 2000);
    const kinds = new Set(out.flatMap((m) => (m.kind === 'malformed' ? [m.malformed] : [])));
    expect(kinds).toEqual(new Set(['not-finite']));
  });

  it('is reproducible from its seed', () => {
    const faults: ScheduledMessageFault[] = [
      { kind: 'dropout', fraction: 0.1 },
      { kind: 'reorder', fraction: 0.1 },
      { kind: 'duplicate', fraction: 0.1 },
    ];
    expect(seqs(shape(faults, 2000, 9).out)).toEqual(seqs(shape(faults, 2000, 9).out));
    expect(seqs(shape(faults, 2000, 10).out)).not.toEqual(seqs(shape(faults, 2000, 9).out));
  });
});
