/**
 * edgewise engine: exact piecewise-linear simulation of switched circuits.
 * @packageDocumentation
 */
export type {
  BlockSpec,
  BodyDiodeSpec,
  CapacitorSpec,
  CircuitSpec,
  ControlledSourceSpec,
  CurrentSourceSpec,
  DiodeSpec,
  ElementSpec,
  InductorSpec,
  LinearBlockSpec,
  MeasurementSpec,
  RampBlockSpec,
  ResistorSpec,
  SineBlockSpec,
  SineSpec,
  SourceStep,
  SwitchSpec,
  VoltageSourceSpec,
} from './circuit.ts';
export { compileCircuit, transferFunctionToStateSpace } from './circuit.ts';
export { CircuitError, SimulationError } from './errors.ts';
export type { CircuitIssue, SimulationErrorCode } from './errors.ts';
export type { SignalInfo, SignalUnit, LinearRef } from './signals.ts';
export { expm, expmAugmented } from './expm.ts';
export { describeKey } from './topology.ts';
export type { Topology } from './topology.ts';
export {
  CircuitModel,
  SampleKind,
  Simulation,
  simulate,
} from './simulator.ts';
export type {
  ControlContext,
  Controller,
  EngineSettings,
  GuardDirection,
  GuardSpec,
  IntegralSpec,
  RunCounters,
  RunOptions,
  RunResult,
  SampleSink,
  TraceListener,
} from './simulator.ts';
