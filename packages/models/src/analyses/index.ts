/**
 * Analyses of switching systems: periodic steady state by shooting with Floquet multipliers,
 * per-cycle metrics, averaged models, frequency responses, efficiency and the validation report.
 */
export type { Chain, ChainInstant, ChainSegment, InstantTiming, Section, SwitchingSystem } from './trace.ts';
export { traceCycle } from './trace.ts';
export type {
  CycleJacobian,
  FloquetMultiplier,
  OrbitStability,
  ShootingOptions,
  SteadyState,
  SteadyStateFailure,
  SteadyStateResult,
} from './shooting.ts';
export { chainJacobian, floquetMultipliers, periodicSteadyState } from './shooting.ts';
export type { Complex } from './linalg.ts';
export type {
  ConductionMode,
  CycleBoundaries,
  CycleMetrics,
  CycleMetricsOptions,
  CycleReport,
  SignalCycleMetrics,
  StepFigures,
} from './cycles.ts';
export { AUDIO_BAND_HZ, measureCycles, stepFigures } from './cycles.ts';
export type {
  AveragedModel,
  CcmAveragedModel,
  CcmAveragingOptions,
  ResponsePoint,
  StateSpace,
  TransferFunction,
  UserAveragedModel,
} from './averaging.ts';
export { ccmAveragedModel, evaluateStateSpace, frequencyResponseOf, topologyKeyOf, userTransferFunction } from './averaging.ts';
export type { SineInjectionOptions } from './frequency-response.ts';
export { sampledDataResponse, sineInjectionResponse, switchingFrequencyResponse } from './frequency-response.ts';
export type { EfficiencyOptions, EfficiencyPoint, EfficiencyReport } from './efficiency.ts';
export { efficiencySweep, steadyStateEfficiency } from './efficiency.ts';
export type {
  DcComparison,
  ResponseComparison,
  RippleComparison,
  StepComparison,
  StepSummary,
  ValidationOptions,
  ValidationReport,
} from './validation.ts';
export { validateAveragedModel } from './validation.ts';
export type { DcmAveragedModel, DcmAveragingOptions } from './dcm-averaging.ts';
export { dcmAveragedModel } from './dcm-averaging.ts';
export type { PeakCurrentModel, PeakCurrentModelOptions } from './current-mode.ts';
export { peakCurrentModel } from './current-mode.ts';
