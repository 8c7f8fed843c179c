// NIS and NEES of simulated samples for the tests, computed apart from the shared library.
import { Matrix, solve } from 'ml-matrix';
import type { SimulatedSample } from '../src/payload';

/** ν'S⁻¹ν for m = 1 or 2 in closed form (S⁻¹ = adj(S)/det(S) for 2×2). */
export function nis(s: SimulatedSample): number {
  if (s.nu.length === 1) return (s.nu[0] * s.nu[0]) / s.S[0][0];
  const [[a, b], [c, d]] = s.S;
  const [x, y] = s.nu;
  return (d * x * x - (b + c) * x * y + a * y * y) / (a * d - b * c);
}

/** e'P⁻¹e (any n), by solving P·u = e. */
export function nees(s: SimulatedSample): number {
  if (!s.e || !s.P) throw new Error('the sample carries no reference error');
  const u = solve(new Matrix(s.P), Matrix.columnVector(s.e)).getColumn(0);
  return s.e.reduce((sum, ei, i) => sum + ei * u[i], 0);
}

export function mean(xs: readonly number[]): number {
  return xs.reduce((a, b) => a + b, 0) / xs.length;
}
