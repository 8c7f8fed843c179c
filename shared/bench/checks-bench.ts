/**
 * Throughput of the per-sample check suite on one core.
 *
 *   npm run bench:checks            (or: npx tsx shared/bench/checks-bench.ts [--quick])
 *
 * For m = 1, 2, 3 and 6 it times EstimatorMonitor.ingest (validation of a plain
 * parsed sample with a full S, Cholesky, NIS, whitening, NIS window test, bias
 * test, whiteness with autocorrelation to lag 10 and Ljung–Box, two-sided CUSUM,
 * sequence check) followed by reading the combined verdict, which evaluates
 * every check against its bounds. Then NIS alone, starting from the parsed
 * nested arrays: the typed-array kernels (with and without the validation),
 * against ml-matrix's CholeskyDecomposition and solve.
 *
 * Samples are drawn once (seeded) from N(0, S) for a fixed random S and reused
 * round-robin with increasing sequence numbers, so the timing is of the checks,
 * not of the random number generator.
 */
import * as os from 'node:os';
import { CholeskyDecomposition, Matrix } from 'ml-matrix';
import { EstimatorMonitor } from '../src/monitor/estimator-monitor';
import { CHOLESKY_OK, choleskyLower, whitenedQuadraticForm } from '../src/linalg/small-kernels';
import { normalizedInnovationSquared } from '../src/sample/normalized-errors';
import { allocateInnovationSample, readInnovationSampleInto, resolveValidationOptions } from '../src/sample/innovation-sample';
import { Random } from '../test/support/random';

const quick = process.argv.includes('--quick');
const POOL = 4096;

interface PlainSample {
  seq: number;
  t: number;
  nu: number[];
  S: number[][];
}

/** A random symmetric positive definite m×m matrix A·A' + m·I. */
function randomCovariance(m: number, random: Random): number[][] {
  const A = Array.from({ length: m }, () => Array.from({ length: m }, () => random.normal()));
  return Array.from({ length: m }, (_, i) =>
    Array.from({ length: m }, (_, j) => A[i].reduce((s, a, k) => s + a * A[j][k], 0) + (i === j ? m : 0)),
  );
}

function makePool(m: number, seed: number): PlainSample[] {
  const random = new Random(seed);
  const S = randomCovariance(m, random);
  // ν = L·z with S = L·L'
  const L = Array.from({ length: m }, () => new Array<number>(m).fill(0));
  for (let i = 0; i < m; i++) {
    for (let j = 0; j <= i; j++) {
      let s = S[i][j];
      for (let k = 0; k < j; k++) s -= L[i][k] * L[j][k];
      L[i][j] = i === j ? Math.sqrt(s) : s / L[j][j];
    }
  }
  return Array.from({ length: POOL }, (_, seq) => {
    const z = Array.from({ length: m }, () => random.normal());
    const nu = L.map((row) => row.reduce((s, l, k) => s + l * z[k], 0));
    return { seq, t: seq, nu, S: S.map((r) => [...r]) };
  });
}

function timeIt(run: () => number, samples: number): { rate: number; sink: number } {
  const start = process.hrtime.bigint();
  const sink = run();
  const seconds = Number(process.hrtime.bigint() - start) / 1e9;
  return { rate: samples / seconds, sink };
}

function median(values: number[]): number {
  const s = [...values].sort((a, b) => a - b);
  return s[Math.floor(s.length / 2)];
}

function benchMonitor(m: number): number {
  const pool = makePool(m, 1000 + m);
  const monitor = new EstimatorMonitor({ windowLength: 100, lags: 10, drift: 'cusum' });
  const total = quick ? 300_000 : 2_000_000;
  let seq = 0;
  const run = (count: number) => (): number => {
    let inconsistent = 0;
    for (let i = 0; i < count; i++) {
      const sample = pool[i & (POOL - 1)];
      sample.seq = seq++;
      monitor.ingest(sample);
      if (monitor.verdict === 'inconsistent') inconsistent++;
    }
    return inconsistent;
  };
  run(200_000)(); // warm-up (JIT, window fill, CUSUM design)
  const rates: number[] = [];
  for (let r = 0; r < 3; r++) rates.push(timeIt(run(total), total).rate);
  return median(rates);
}

function benchNisKernels(m: number): { kernel: number; validated: number; mlMatrix: number } {
  const pool = makePool(m, 2000 + m);
  const total = quick ? 200_000 : 1_000_000;
  const S = new Float64Array(m * m);
  const L = new Float64Array(m * m);
  const nu = new Float64Array(m);
  const w = new Float64Array(m);
  // typed-array kernels: copy S and ν, Cholesky, forward substitution
  const kernel = (): number => {
    let s = 0;
    for (let i = 0; i < total; i++) {
      const sample = pool[i & (POOL - 1)];
      for (let r = 0; r < m; r++) {
        const row = sample.S[r];
        for (let c = 0; c < m; c++) S[r * m + c] = row[c];
        nu[r] = sample.nu[r];
      }
      if (choleskyLower(S, m, L) !== CHOLESKY_OK) throw new Error('not positive definite');
      s += whitenedQuadraticForm(L, m, nu, w);
    }
    return s;
  };
  // the same with full validation (types, finiteness, symmetry), as the monitor does it
  const typed = allocateInnovationSample(m, 0);
  const scratch = new Float64Array(m * m + m);
  const options = resolveValidationOptions();
  const validated = (): number => {
    let s = 0;
    for (let i = 0; i < total; i++) {
      readInnovationSampleInto(pool[i & (POOL - 1)], typed, m, 0, options, scratch);
      s += normalizedInnovationSquared(typed, w);
    }
    return s;
  };
  // ml-matrix: Matrix from the nested arrays, CholeskyDecomposition, solve
  const mlMatrix = (): number => {
    let s = 0;
    for (let i = 0; i < total; i++) {
      const sample = pool[i & (POOL - 1)];
      const cholesky = new CholeskyDecomposition(new Matrix(sample.S));
      if (!cholesky.isPositiveDefinite()) throw new Error('not positive definite');
      const x = Matrix.columnVector(sample.nu);
      // NIS = ν'·(S⁻¹ν), S⁻¹ν by the two triangular solves
      s += x.transpose().mmul(cholesky.solve(x)).get(0, 0);
    }
    return s;
  };
  kernel();
  validated();
  mlMatrix();
  const a = timeIt(kernel, total);
  const b = timeIt(validated, total);
  const c = timeIt(mlMatrix, total);
  for (const other of [b.sink, c.sink]) {
    if (Math.abs(a.sink - other) > 1e-9 * Math.abs(a.sink)) throw new Error(`NIS mismatch: ${a.sink} vs ${other}`);
  }
  return { kernel: a.rate, validated: b.rate, mlMatrix: c.rate };
}

function main(): void {
  const cpus = os.cpus();
  console.log(`Whitecap check-suite benchmark — ${new Date().toISOString()}`);
  console.log(`node ${process.version}, ${cpus.length} cores (${cpus[0]?.model ?? 'unknown'}), one core used${quick ? ', quick mode' : ''}`);
  console.log('');
  console.log('Full per-sample suite (EstimatorMonitor.ingest + verdict; N = 100, L = 10, CUSUM):');
  console.log('   m   samples/s');
  const results: Record<number, number> = {};
  for (const m of [1, 2, 3, 6]) {
    results[m] = benchMonitor(m);
    console.log(`  ${String(m).padStart(2)}   ${Math.round(results[m]).toLocaleString('en-US').padStart(10)}`);
  }
  console.log('');
  console.log('NIS alone, from the parsed nested arrays (NIS/s):');
  console.log('   m   typed kernels   kernels + validation   ml-matrix Cholesky   kernels ÷ ml-matrix');
  const fmt = (x: number, width: number): string => Math.round(x).toLocaleString('en-US').padStart(width);
  for (const m of [1, 2, 3, 6]) {
    const r = benchNisKernels(m);
    console.log(`  ${String(m).padStart(2)}   ${fmt(r.kernel, 13)}   ${fmt(r.validated, 20)}   ${fmt(r.mlMatrix, 18)}   ${(r.kernel / r.mlMatrix).toFixed(1).padStart(18)}×`);
  }
  const target = 1_000_000;
  console.log('');
  console.log(`Target ≥ ${target.toLocaleString('en-US')} samples/s for m = 2: ${results[2] >= target ? 'met' : 'NOT met'} (${Math.round(results[2]).toLocaleString('en-US')}).`);
}

main();
