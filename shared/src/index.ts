/**
 * Whitecap consistency and drift checks: pure TypeScript, no I/O, usable from
 * the ingest service and the dashboard alike.
 */
export {
  InnovationSampleError,
  validateInnovationSample,
  readInnovationSampleInto,
  allocateInnovationSample,
  resolveValidationOptions,
  DEFAULT_SYMMETRY_TOLERANCE,
  DEFAULT_PIVOT_TOLERANCE,
  DEFAULT_MAX_DIMENSION,
} from './sample/innovation-sample';
export type {
  InnovationSampleErrorCode,
  InnovationSampleInput,
  InnovationSample,
  ValidationOptions,
  ResolvedValidationOptions,
} from './sample/innovation-sample';

export { normalizedInnovationSquared, normalizedEstimationErrorSquared, sampleStatistics } from './sample/normalized-errors';
export type { SampleStatistics } from './sample/normalized-errors';

export { CHOLESKY_OK, choleskyLower, forwardSubstitute, sumOfSquares, whitenedQuadraticForm } from './linalg/small-kernels';

export {
  chiSquareCdf,
  chiSquareSurvival,
  chiSquareQuantile,
  chiSquareTwoSidedPValue,
  chiSquareInterval,
  chiSquareUpperCritical,
  normalQuantile,
  normalCdf,
  normalTwoSidedPValue,
} from './stats/chi-square';
export type { Interval } from './stats/chi-square';
export { binomialUpperTail } from './stats/binomial';

export { verdictOf, severityOf, worseVerdict, CheckpointError } from './checks/verdict';
export type { Verdict, EstimatorVerdict, Severity, Significance } from './checks/verdict';

export { ChiSquareWindowTest } from './checks/chi-square-window-test';
export type { ChiSquareWindowConfig, ChiSquareWindowState, ChiSquareWindowEvidence } from './checks/chi-square-window-test';

export { BiasTest } from './checks/bias-test';
export type { BiasTestConfig, BiasTestState, BiasEvidence, BiasComponentEvidence } from './checks/bias-test';

export { WhitenessTest, autocorrelation, ljungBox } from './checks/whiteness-test';
export type {
  WhitenessTestConfig,
  WhitenessTestState,
  WhitenessEvidence,
  WhitenessComponentEvidence,
  LjungBoxResult,
} from './checks/whiteness-test';

export { cusumArl, siegmundArl, combinedArl, cusumThresholdForArl, DEFAULT_ARL_STATES } from './checks/cusum-arl';
export type { IncrementCdf } from './checks/cusum-arl';

export { TwoSidedCusum, designNisCusum, nisCusumReference, upperIncrementCdf, lowerIncrementCdf } from './checks/cusum';
export type { TwoSidedCusumConfig, TwoSidedCusumState, NisCusumDesign, NisCusumDesignInput, CusumEvidence } from './checks/cusum';

export { PageHinkleyTest, designPageHinkley } from './checks/page-hinkley';
export type { PageHinkleyConfig, PageHinkleyDesign, PageHinkleyState, PageHinkleyEvidence } from './checks/page-hinkley';

export { SequenceCheck, isAccepted } from './checks/sequence-check';
export type { SequenceOutcome, SequenceCheckConfig, SequenceCheckState, SequenceEvidence } from './checks/sequence-check';

export {
  EstimatorMonitor,
  DEFAULT_MONITOR_CONFIG,
  resolveMonitorConfig,
  describeReasons,
  ingestInnovationSample,
} from './monitor/estimator-monitor';
export type {
  EstimatorMonitorConfig,
  EstimatorMonitorState,
  EstimatorReport,
  EstimatorChecksEvidence,
  CheckVerdicts,
  DriftDetector,
  IngestResult,
} from './monitor/estimator-monitor';

export { benjaminiHochberg, fleetDiscoveries } from './fleet/benjamini-hochberg';
export type { BenjaminiHochbergResult, FleetEntry } from './fleet/benjamini-hochberg';

export { validateWatchRota, onWatchAt, nextHandovers, handoffChain, WatchRotaError } from './rota/watch-rota';
export type {
  WatchRota,
  WatchShift,
  WatchOverride,
  RotaScope,
  IsoWeekday,
  RotaIssue,
  RotaIssueCode,
  RotaValidation,
  OnWatch,
  Handover,
} from './rota/watch-rota';
