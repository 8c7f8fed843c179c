/**
 * Per-sample normalized errors of a Kalman filter.
 *
 * Method: Bar-Shalom, Li & Kirubarajan, "Estimation with Applications to Tracking
 * and Navigation" (Wiley, 2001), §5.4.2 (NEES) and §5.4.3 (NIS):
 *   NIS  ε_ν = ν'·S⁻¹·ν   ~ χ²_m under a consistent filter,
 *   NEES ε_x = e'·P⁻¹·e   ~ χ²_n where e = x − x̂ is known.
 * Both are evaluated through the Cholesky factor (S = L·L'): with the whitened
 * innovation w = L⁻¹·ν (forward substitution, no inverse), NIS = ‖w‖². Under a
 * consistent filter w ~ N(0, I_m), which the bias and whiteness tests use.
 */
import { whitenedQuadraticForm } from '../linalg/small-kernels';
import { InnovationSample, ValidationOptions, validateInnovationSample } from './innovation-sample';

/** NIS ν'S⁻¹ν of a validated sample; writes the whitened innovation L⁻¹ν into w (length ≥ m). */
export function normalizedInnovationSquared(sample: InnovationSample, w: Float64Array): number {
  return whitenedQuadraticForm(sample.L, sample.m, sample.nu, w);
}

/** NEES e'P⁻¹e of a validated sample with a reference error (n > 0); uses scratch (length ≥ n). */
export function normalizedEstimationErrorSquared(sample: InnovationSample, scratch: Float64Array): number {
  if (sample.n === 0) throw new RangeError('the sample carries no reference error e');
  return whitenedQuadraticForm(sample.LP, sample.n, sample.e, scratch);
}

/** The per-sample statistics of one plain sample. */
export interface SampleStatistics {
  /** ν'S⁻¹ν */
  nis: number;
  /** L⁻¹ν */
  whitened: number[];
  /** e'P⁻¹e, when the sample has e and P. */
  nees: number | undefined;
}

/**
 * Validates a plain sample and returns its NIS, whitened innovation and NEES
 * (allocates; for one-off use — the monitor has its own allocation-free path).
 * Throws InnovationSampleError.
 */
export function sampleStatistics(raw: unknown, options: ValidationOptions = {}): SampleStatistics {
  const sample = validateInnovationSample(raw, options);
  const w = new Float64Array(sample.m);
  const nis = normalizedInnovationSquared(sample, w);
  const nees = sample.n > 0 ? normalizedEstimationErrorSquared(sample, new Float64Array(sample.n)) : undefined;
  return { nis, whitened: Array.from(w), nees };
}
