// Malformed payloads, for quarantine to have something to hold. Each kind breaks one
// rule of the payload contract (shared/src/payload/innovation-payload.schema.json and
// the checks behind it):
//   not-json               a message cut short: the first half of a valid payload
//   wrong-dimension        ν has one component more than S has rows
//   not-finite             ν₀ written as 1e999, which JSON parsers read as Infinity
//   not-positive-definite  a symmetric S that is not positive definite
//                          (m = 1: a negative variance; m ≥ 2: |S₀₁| > √(S₀₀·S₁₁))
//   missing-field          one of seq, nu and S left out
import { singlePayload, singlePayloadObject, type PayloadOptions, type SimulatedSample } from './payload';
import type { SeededRandom } from './random';

export const malformedKinds = [
  'not-json',
  'wrong-dimension',
  'not-finite',
  'not-positive-definite',
  'missing-field',
] as const;

export type MalformedKind = (typeof malformedKinds)[number];

export function isMalformedKind(s: string): s is MalformedKind {
  return (malformedKinds as readonly string[]).includes(s);
}

const INFINITY_MARK = '__not_finite__';

/** A payload built from a valid sample and broken in the way `kind` says. */
export function malformedPayload(
  kind: MalformedKind,
  sample: SimulatedSample,
  random: SeededRandom,
  options: PayloadOptions = {},
): string {
  const m = sample.nu.length;
  switch (kind) {
    case 'not-json': {
      const valid = singlePayload(sample, options);
      return valid.slice(0, Math.floor(valid.length / 2));
    }
    case 'wrong-dimension':
      return JSON.stringify(singlePayloadObject({ ...sample, nu: [...sample.nu, sample.nu[0]] }, options));
    case 'not-finite': {
      const body = singlePayloadObject(sample, options);
      body['nu'] = [INFINITY_MARK, ...sample.nu.slice(1)];
      return JSON.stringify(body).replace(`"${INFINITY_MARK}"`, '1e999');
    }
    case 'not-positive-definite': {
      const S = sample.S.map((row) => [...row]);
      if (m === 1) {
        S[0][0] = -Math.abs(S[0][0]);
      } else {
        // 2×2 leading block with determinant S₀₀S₁₁ − 4S₀₀S₁₁ < 0
        const c = 2 * Math.sqrt(S[0][0] * S[1][1]);
        S[0][1] = c;
        S[1][0] = c;
      }
      return JSON.stringify(singlePayloadObject({ ...sample, S }, options));
    }
    case 'missing-field': {
      const body = singlePayloadObject(sample, options);
      const field = (['seq', 'nu', 'S'] as const)[random.integer(3)];
      delete body[field];
      return JSON.stringify(body);
    }
  }
}
