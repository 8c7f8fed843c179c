import { Ajv2020 } from 'ajv/dist/2020';
import payloadSchema from '../../shared/src/payload/innovation-payload.schema.json';
import { InnovationSampleError, validateInnovationSample } from '../../shared/src/sample/innovation-sample';
import { malformedKinds, malformedPayload, type MalformedKind } from './malformed';
import { batchPayload, singlePayload, type SimulatedSample } from './payload';
import { PlantFilter } from './plant-filter';
import { plantDesign, plantKinds } from './plant-models';
import { SeededRandom } from './random';

const validateSchema = new Ajv2020({ strict: false, validateFormats: false }).compile(payloadSchema);

function samples(kind: (typeof plantKinds)[number], count: number): SimulatedSample[] {
  const f = new PlantFilter({ design: plantDesign(kind), seed: 4, startTime: Date.UTC(2025, 0, 1) });
  return Array.from({ length: count }, () => f.next());
}

/** The shared library's verdict on one parsed sample: null when valid, else its error code. */
function rejection(parsed: unknown): string | null {
  try {
    validateInnovationSample(parsed);
    return null;
  } catch (err) {
    if (err instanceof InnovationSampleError) return err.code;
    throw err;
  }
}

describe('valid payloads', () => {
  it.each(plantKinds)('%s: the single and batch forms follow the published schema and pass the sample checks', (kind) => {
    const batch = samples(kind, 20);
    for (const s of batch) {
      const single = JSON.parse(singlePayload(s, { rev: 1 }));
      expect(validateSchema(single)).toBe(true);
      expect(rejection(single)).toBeNull();
    }
    const parsed = JSON.parse(batchPayload(batch, { rev: 1 }));
    expect(validateSchema(parsed)).toBe(true);
    expect(parsed.samples).toHaveLength(20);
    expect(parsed.samples.map((s: { seq: number }) => s.seq)).toEqual(batch.map((s) => s.seq));
  });

  it('writes t as epoch milliseconds or as RFC 3339', () => {
    const [s] = samples('cabinet-thermal', 1);
    expect(JSON.parse(singlePayload(s)).t).toBe(Date.UTC(2025, 0, 1) + 1000);
    const rfc = JSON.parse(singlePayload(s, { time: 'rfc3339' }));
    expect(rfc.t).toBe('2025-01-01T00:00:01.000Z');
    expect(validateSchema(rfc)).toBe(true);
  });

  it('refuses a batch of more than 1000 samples', () => {
    const [s] = samples('cabinet-thermal', 1);
    expect(() => batchPayload(Array.from({ length: 1001 }, () => s))).toThrow(/1 to 1000/);
  });
});

describe('malformedPayload', () => {
  const random = new SeededRandom(7);
  const expectations: Record<MalformedKind, (text: string) => void> = {
    'not-json': (text) => expect(() => JSON.parse(text)).toThrow(SyntaxError),
    'wrong-dimension': (text) => {
      const p = JSON.parse(text);
      expect(p.nu.length).toBe(p.S.length + 1);
      expect(rejection(p)).toBe('dimension_mismatch');
    },
    'not-finite': (text) => {
      expect(text).toContain('1e999');
      const p = JSON.parse(text);
      expect(p.nu[0]).toBe(Infinity);
      expect(rejection(p)).toBe('not_finite');
    },
    'not-positive-definite': (text) => {
      const p = JSON.parse(text);
      // still symmetric, so only the positive definiteness check catches it
      expect(p.S).toEqual(p.S.map((row: number[], i: number) => row.map((_, j) => p.S[j][i])));
      expect(validateSchema(p)).toBe(true);
      expect(rejection(p)).toBe('not_positive_definite');
    },
    'missing-field': (text) => {
      const p = JSON.parse(text);
      expect(validateSchema(p)).toBe(false);
      expect(rejection(p)).toBe('missing_field');
    },
  };

  describe.each(plantKinds)('%s', (kind) => {
    const [sample] = samples(kind, 1);
    it.each(malformedKinds)('makes a %s payload that the checks reject for that reason', (malformed) => {
      expectations[malformed](malformedPayload(malformed, sample, random, { rev: 1 }));
    });
  });

  it('leaves out each of seq, nu and S in turn', () => {
    const [sample] = samples('tractor-position', 1);
    const missing = new Set<string>();
    for (let i = 0; i < 60; i++) {
      const p = JSON.parse(malformedPayload('missing-field', sample, random));
      for (const field of ['seq', 'nu', 'S']) if (!(field in p)) missing.add(field);
    }
    expect(missing).toEqual(new Set(['seq', 'nu', 'S']));
  });
});
