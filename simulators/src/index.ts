// The fleet simulator's programmatic surface, for tests and benchmarks.
export { PlantFilter, type PlantFilterOptions } from './plant-filter';
export { plantDesign, designModel, plantKinds, type PlantKind, type PlantDesign, type LinearGaussianModel } from './plant-models';
export {
  parseFaultSpec,
  formatFaultSpec,
  isActive,
  type Fault,
  type FleetFault,
  type FaultSchedule,
  type MeasurementFault,
  type MessageFault,
} from './faults';
export { MessageShaper, type OutgoingMessage } from './message-faults';
export { malformedPayload, malformedKinds, type MalformedKind } from './malformed';
export { singlePayload, batchPayload, MAX_BATCH_SIZE, type SimulatedSample, type TimeFormat } from './payload';
export { SeededRandom, seedOf } from './random';
export {
  startFleet,
  publishSamples,
  UnitConnection,
  ConnectionRefusedError,
  type FleetOptions,
  type FleetStats,
  type RunningFleet,
  type PublishSamplesOptions,
  type PublishSamplesResult,
} from './publisher';
export {
  saltmarshUnits,
  syntheticTractors,
  fleetOfSize,
  saltmarshFaults,
  saltmarshFaultSpecs,
  type SimulatedUnit,
  type SimulatedEstimator,
} from './saltmarsh-fleet';
