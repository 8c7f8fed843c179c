/**
 * Estimator and regulator design math for the designer's workbench: the
 * discrete algebraic Riccati equation (SDA), steady-state Kalman and LQR
 * gains, structural checks and the separation-principle check.
 */
export {
  solveDare,
  DEFAULT_DARE_TOLERANCE,
  DEFAULT_DARE_MAX_ITERATIONS,
  DEFAULT_DARE_RESIDUAL_TOLERANCE,
} from './riccati';
export type { DareOptions, DareSolution } from './riccati';

export { steadyStateKalman, lqr, estimatorPoles, regulatorPoles } from './gains';
export type { KalmanDesignInput, SteadyStateKalman, LqrDesign } from './gains';

export {
  DesignError,
  eigenvalues,
  compareEigenvalues,
  definiteness,
  controllability,
  observability,
  stabilizability,
  detectability,
  pbhMargin,
  matchSpectra,
  separationCheck,
  DEFAULT_RANK_TOLERANCE,
  DEFAULT_UNIT_CIRCLE_MARGIN,
  DEFAULT_SYMMETRY_TOLERANCE as DEFAULT_DESIGN_SYMMETRY_TOLERANCE,
  DEFAULT_DEFINITENESS_TOLERANCE,
} from './structure';
export type {
  DesignErrorCode,
  MatrixInput,
  Complex,
  Mode,
  StructureOptions,
  DefinitenessOptions,
  Definiteness,
  ControllabilityReport,
  ObservabilityReport,
  StabilizabilityReport,
  DetectabilityReport,
  SpectrumMatching,
  SeparationOptions,
  SeparationReport,
  SeparationVerdict,
} from './structure';

// Robustness margins of the loop broken at the plant input (gain, phase, disk).
export * from './margins';

// Noise covariances from innovations: autocovariance least squares.
export * from './als';
