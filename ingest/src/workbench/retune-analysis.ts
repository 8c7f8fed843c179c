/**
 * The numbers of a retune study, from a design revision's model and the field
 * innovations of the estimators that run it. Pure: no I/O.
 *
 *  1. The filter in use: the model's stored predictor gain L, or the steady-state
 *     Kalman predictor for the assumed Q and R (gains.ts).
 *  2. Q̂ and R̂ by autocovariance least squares from its innovations (als.ts; Odelson,
 *     Rajamani & Rawlings, Automatica 42 (2006) 303–308).
 *  3. The proposed filter: the steady-state Kalman predictor for Q̂ and R̂.
 *  4. NIS per component: observed (stored per sample); predicted for the current filter
 *     under the estimated noise,
 *         E[νᵀ S⁻¹ ν]/m = tr(S⁻¹ S_true)/m,   S_true = C Σ Cᵀ + R̂,
 *         Σ = (A − L C) Σ (A − L C)ᵀ + G Q̂ Gᵀ + L R̂ Lᵀ     (lyapunov.ts),
 *     and the same for the proposed filter (1 by construction: there S_true = S).
 *  5. With a regulator gain K (u = −K x̂) and the model's B: the separation check of the
 *     combined loop with the proposed filter, and the margins at the plant input with the
 *     current and the proposed filter (margins.ts), with warnings below the floors.
 */
import { Matrix, solve } from 'ml-matrix';
import type { ComplexNumber, RetuneStudy, StudyFilter, StudyMargins } from '../../../shared/src/api/api-types';
import {
  AlsError,
  compareMargins,
  DesignError,
  estimateNoiseCovariances,
  estimatorPoles,
  MarginInputError,
  observability,
  plantInputMargins,
  separationCheck,
  steadyStateKalman,
  type AlsResult,
  type LoopMargins,
} from '../../../shared/src/design/index';
import { formatMode, readMatrix, readSquare } from '../../../shared/src/design/structure';
import { LyapunovError, solveDiscreteLyapunov } from './lyapunov';

/** The model stored in design_revisions.model (row-major matrices). */
export interface DesignModel {
  A: number[][];
  C: number[][];
  G?: number[][];
  Q: number[][];
  R: number[][];
  B?: number[][];
  K?: number[][];
  /** The predictor gain in use, when the design stores it. */
  L?: number[][];
  dt?: number;
}

/** A study the data or the design cannot support: becomes a 422 problem. */
export class StudyRefused extends Error {
  override readonly name = 'StudyRefused';
  constructor(
    readonly kind: string,
    readonly title: string,
    message: string,
  ) {
    super(message);
  }
}

export interface RetuneOptions {
  lags: number;
  estimateQ: 'diagonal' | 'full';
  estimateR: 'diagonal' | 'full';
  regulatorK?: number[][];
  marginFloor?: { gainDb?: number; phaseDeg?: number; diskAlpha?: number };
  /** Block bootstrap from this many samples on (default 2,000). */
  bootstrapFrom?: number;
  bootstrapReplicates?: number;
  bootstrapSeed?: number;
  /** Frequency points of the margin sweeps (default 400). */
  sweepPoints?: number;
}

export type RetuneNumbers = Pick<RetuneStudy, 'assumed' | 'estimated' | 'nis' | 'current' | 'proposed' | 'loop' | 'autocovariance'> & {
  notes: string[];
};

export const BOOTSTRAP_FROM = 2_000;
export const BOOTSTRAP_REPLICATES = 50;
export const BOOTSTRAP_SEED = 20_261_202;
/** Below this many samples a study says its estimates are rough. */
export const FEW_SAMPLES = 2_000;

interface CheckedModel {
  A: Matrix;
  C: Matrix;
  G: Matrix;
  Q: Matrix;
  R: Matrix;
  n: number;
  p: number;
  g: number;
}

const rows = (M: Matrix): number[][] => M.to2DArray();
const poles = (z: { re: number; im: number }[]): ComplexNumber[] => z.map(({ re, im }) => ({ re, im }));
const finiteOrNull = (x: number | undefined | null): number | null => (x !== undefined && x !== null && Number.isFinite(x) ? x : null);

/** Reads and checks the design's model; refuses (422) what no study can use. */
export function checkModel(model: DesignModel, measurementDim: number): CheckedModel {
  let A: Matrix, C: Matrix, G: Matrix, Q: Matrix, R: Matrix;
  try {
    A = readSquare('A', model.A);
    const n = A.rows;
    C = readMatrix('C', model.C, { columns: n, columnsBecause: 'one per state of A' });
    if (C.rows !== measurementDim) {
      throw new DesignError('dimension', `C has ${C.rows} rows but the design revision measures ${measurementDim} components`, 'C');
    }
    G = model.G === undefined ? Matrix.eye(n) : readMatrix('G', model.G, { rows: n, rowsBecause: 'one per state of A' });
    Q = readSquare('Q', model.Q, G.columns, model.G === undefined ? 'there is no G, so one per state' : 'one per column of G');
    R = readSquare('R', model.R, C.rows, 'one per row of C');
  } catch (err) {
    if (err instanceof DesignError) throw new StudyRefused('design-unusable', 'The design cannot be studied', `The design revision's model is unusable: ${err.message}.`);
    throw err;
  }
  // ALS and the gains need every state seen in the innovations: an unobservable mode
  // leaves its noise undetermined and its gain column arbitrary.
  const obs = observability(rows(A), rows(C));
  if (!obs.observable) {
    const modes = obs.unobservableModes.map((m) => formatMode(m)).join(', ');
    throw new StudyRefused(
      'design-unobservable',
      'The design is not observable',
      `The measurements (C) do not see every state of A: the observable subspace has dimension ${obs.rank} of ${obs.states}, ` +
        `and the mode${obs.unobservableModes.length === 1 ? '' : 's'} ${modes} never show${obs.unobservableModes.length === 1 ? 's' : ''} in the innovations. ` +
        'The noise driving them cannot be estimated from field residuals; measure more components or reduce the model.',
    );
  }
  return { A, C, G, Q, R, n: A.rows, p: C.rows, g: G.columns };
}

/** Σ = (A − L C) Σ (A − L C)ᵀ + G Q Gᵀ + L R Lᵀ, then S_true = C Σ Cᵀ + R. */
export function innovationCovarianceUnder(m: CheckedModel, L: Matrix, Q: Matrix, R: Matrix): Matrix {
  const F = Matrix.sub(m.A, L.mmul(m.C)); // A − L C
  const W = Matrix.add(m.G.mmul(Q).mmul(m.G.transpose()), L.mmul(R).mmul(L.transpose())); // G Q Gᵀ + L R Lᵀ
  const Sigma = solveDiscreteLyapunov(F, W);
  return Matrix.add(m.C.mmul(Sigma).mmul(m.C.transpose()), R);
}

/** tr(S⁻¹ S_true)/m */
export function nisPerComponent(S: Matrix, Strue: Matrix): number {
  const X = solve(S, Strue);
  let trace = 0;
  for (let i = 0; i < X.rows; i++) trace += X.get(i, i);
  return trace / X.rows;
}

function kalman(m: CheckedModel, Q: Matrix, R: Matrix, which: 'current' | 'proposed'): StudyFilter {
  try {
    const k = steadyStateKalman({ A: rows(m.A), C: rows(m.C), G: rows(m.G), Q: rows(Q), R: rows(R) });
    return { L: k.L, S: k.S, poles: poles(k.poles) };
  } catch (err) {
    if (!(err instanceof DesignError)) throw err;
    if (which === 'current') {
      throw new StudyRefused('design-unusable', 'The filter in use cannot be computed', `The steady-state filter for the assumed Q and R cannot be computed: ${err.message}.`);
    }
    throw new StudyRefused(
      'no-proposed-filter',
      'No filter for the estimated noise',
      `The estimated noise covariances do not define a steady-state filter: ${err.message}. ` +
        'This happens when the estimate puts zero noise where the model needs some (for example a zero R, or no process noise on a mode on the unit circle); ' +
        "a longer window or more estimators may settle it; if not, check that the model's noise input G fits the plant.",
    );
  }
}

function studyMargins(x: LoopMargins): StudyMargins {
  return {
    closedLoopStable: x.closedLoopStable,
    gainMarginUpperDb: finiteOrNull(x.gainMarginDb?.upper),
    gainMarginLowerDb: finiteOrNull(x.gainMarginDb?.lower),
    phaseMarginDeg: finiteOrNull(x.phaseMarginDeg?.value),
    diskAlpha: finiteOrNull(x.diskMargin?.alpha),
    sweep: { omega: x.sweep.omega, magnitudeDb: x.sweep.magnitudeDb, phaseDeg: x.sweep.phaseDeg },
  };
}

function fmt(x: number, digits = 3): string {
  return Number(x.toPrecision(digits)).toString();
}

/** The retune study's numbers for one design and its estimators' innovation segments. */
export function retuneNumbers(
  model: DesignModel,
  measurementDim: number,
  segments: ReadonlyArray<ReadonlyArray<ArrayLike<number>>>,
  observedNisSum: number,
  options: RetuneOptions,
): RetuneNumbers {
  const notes: string[] = [];
  const m = checkModel(model, measurementDim);
  const samples = segments.reduce((a, s) => a + s.length, 0);

  // 1. The filter in use.
  let current: StudyFilter;
  let Lcur: Matrix;
  if (model.L !== undefined) {
    try {
      Lcur = readMatrix('L', model.L, { rows: m.n, rowsBecause: 'one per state of A', columns: m.p, columnsBecause: 'one per measured component' });
      const S = innovationCovarianceUnder(m, Lcur, m.Q, m.R);
      current = { L: model.L, S: rows(S), poles: poles(estimatorPoles(rows(m.A), rows(m.C), model.L)) };
    } catch (err) {
      if (err instanceof DesignError || err instanceof LyapunovError) {
        throw new StudyRefused('design-unusable', 'The filter in use is unusable', `The predictor gain L stored in the design is unusable: ${err.message}.`);
      }
      throw err;
    }
    notes.push('The filter in use is the predictor gain L stored in the design revision; its innovation covariance S is the one that gain gives under the assumed Q and R.');
  } else {
    current = kalman(m, m.Q, m.R, 'current');
    Lcur = new Matrix(current.L);
    notes.push('The filter in use is the steady-state Kalman predictor for the assumed Q and R (the design stores no gain).');
  }

  // 2. ALS.
  let als: AlsResult;
  const bootstrap =
    samples >= (options.bootstrapFrom ?? BOOTSTRAP_FROM)
      ? { replicates: options.bootstrapReplicates ?? BOOTSTRAP_REPLICATES, seed: options.bootstrapSeed ?? BOOTSTRAP_SEED }
      : undefined;
  try {
    als = estimateNoiseCovariances(
      { A: rows(m.A), C: rows(m.C), G: rows(m.G), L: current.L, gainForm: 'predictor' },
      segments,
      { lags: options.lags, estimateQ: options.estimateQ, estimateR: options.estimateR, bootstrap },
    );
  } catch (err) {
    if (err instanceof AlsError) {
      throw new StudyRefused('not-estimable', 'The noise cannot be estimated from these data', `Autocovariance least squares refused: ${err.message}.`);
    }
    throw err;
  }
  const Qhat = new Matrix(als.Q);
  const Rhat = new Matrix(als.R);
  notes.push(als.identifiable.reason);
  if (samples < FEW_SAMPLES) {
    notes.push(`Only ${samples} samples: the estimates are rough and no bootstrap intervals were computed (they are from ${FEW_SAMPLES} samples on); a longer window or more estimators give firmer numbers.`);
  }
  if (als.intervals) {
    notes.push(
      `Intervals: ${Math.round(als.intervals.level * 100)} % percentile intervals from ${als.intervals.replicates} moving-block bootstrap replicates ` +
        `(blocks of ${als.intervals.blockLength} samples, seed ${als.intervals.seed}); approximate, and narrower than they should be when the data are few.`,
    );
  }
  if (!als.solver.converged) notes.push('The constrained least-squares solve stopped before it converged; treat the estimate with care.');

  // 3. The proposed filter.
  const proposed = kalman(m, Qhat, Rhat, 'proposed');
  const Lprop = new Matrix(proposed.L);

  // 4. NIS per component.
  const p = m.p;
  const observed = samples > 0 ? observedNisSum / samples / p : NaN;
  let predictedCurrent: number;
  let predictedProposed: number;
  try {
    predictedCurrent = nisPerComponent(new Matrix(current.S), innovationCovarianceUnder(m, Lcur, Qhat, Rhat));
    predictedProposed = nisPerComponent(new Matrix(proposed.S), innovationCovarianceUnder(m, Lprop, Qhat, Rhat));
  } catch (err) {
    if (err instanceof LyapunovError) throw new StudyRefused('not-estimable', 'The predicted NIS cannot be computed', err.message);
    throw err;
  }
  if (Number.isFinite(observed) && predictedCurrent > 0) {
    const gap = observed / predictedCurrent - 1;
    if (Math.abs(gap) > 0.25) {
      notes.push(
        `The observed NIS (${fmt(observed)} per component) differs by ${Math.round(Math.abs(gap) * 100)} % from what the estimated noise predicts for the filter in use (${fmt(predictedCurrent)}): ` +
          'the innovations carry something the model does not (a bias, a fault, a changed plant, or filters far from steady state), and the estimate deserves suspicion.',
      );
    }
  }

  // 5. The loop.
  let loop: RetuneNumbers['loop'] = null;
  const K = options.regulatorK ?? model.K;
  if (K !== undefined) {
    if (model.B === undefined) {
      notes.push('A regulator gain was given but the design has no input matrix B, so the closed loop was not checked.');
    } else {
      const dt = model.dt ?? 1;
      try {
        readMatrix('K', K, { columns: m.n, columnsBecause: 'one per state of A' });
        const separation = separationCheck(rows(m.A), model.B, rows(m.C), K, proposed.L);
        const sweep = { points: options.sweepPoints ?? 400 };
        const before = plantInputMargins({ A: rows(m.A), B: model.B, C: rows(m.C), K, estimator: { form: 'predictor', L: current.L }, dt }, sweep);
        const after = plantInputMargins({ A: rows(m.A), B: model.B, C: rows(m.C), K, estimator: { form: 'predictor', L: proposed.L }, dt }, sweep);
        const floor = options.marginFloor ?? {};
        const warnings = compareMargins(before, after, {
          ...(floor.gainDb !== undefined ? { gainMarginDb: floor.gainDb } : {}),
          ...(floor.phaseDeg !== undefined ? { phaseMarginDeg: floor.phaseDeg } : {}),
          ...(floor.diskAlpha !== undefined ? { diskAlpha: floor.diskAlpha } : {}),
        });
        loop = {
          K,
          separation: { agree: separation.agree, largestMismatch: separation.largestMismatch, combinedPoles: poles(separation.combinedPoles) },
          marginsCurrent: studyMargins(before),
          marginsProposed: studyMargins(after),
          warnings: warnings.map((w) => w.message),
        };
        if (!separation.agree) {
          notes.push(
            `Separation check: the combined loop's poles with the proposed filter differ from eig(A − BK) ∪ eig(A − LC) by ${separation.largestMismatch.toExponential(2)} (${separation.verdict}).`,
          );
        }
        if (model.dt === undefined) notes.push('The design stores no sample time; margins use dt = 1 s.');
      } catch (err) {
        if (err instanceof DesignError || err instanceof MarginInputError) {
          throw new StudyRefused('loop-unusable', 'The loop cannot be checked', `The regulator gain or B does not fit the design: ${err.message}.`);
        }
        throw err;
      }
    }
  }

  const N = als.lags;
  return {
    assumed: { Q: rows(m.Q), R: rows(m.R) },
    estimated: {
      Q: als.Q,
      R: als.R,
      intervals: als.intervals
        ? {
            Q: als.intervals.Q.lower.map((row, i) => row.map((lo, j): [number, number] => [lo, als.intervals!.Q.upper[i][j]])),
            R: als.intervals.R.lower.map((row, i) => row.map((lo, j): [number, number] => [lo, als.intervals!.R.upper[i][j]])),
          }
        : null,
      identifiable: { Q: als.identifiable.Q, R: als.identifiable.R, reason: als.identifiable.reason },
      rank: als.rank,
      unknowns: als.unknowns,
      // JSON has no ∞: a singular ALS matrix (σ_min = 0) is reported as null
      condition: (Number.isFinite(als.condition) ? als.condition : null) as number,
    },
    nis: { observed, predictedCurrent, predictedProposed, m: p },
    current,
    proposed,
    loop,
    autocovariance: {
      lags: Array.from({ length: N }, (_, j) => j),
      estimated: als.autocovariances.estimated.map((Cj) => Cj[0][0]),
      fitted: als.autocovariances.fitted.map((Cj) => Cj[0][0]),
    },
    notes,
  };
}
