import type { BlockSpec, CircuitSpec, Controller, MeasurementSpec } from '@edgewise/engine';

/** Converter topology of a stage. */
export type StageKind = 'buck' | 'boost' | 'buck-boost';

/** Rectification: a diode, or a second controlled switch (synchronous). */
export type Rectification = 'diode' | 'synchronous';

/**
 * Names of the useful signals of a built stage (engine signal names). Every stage exposes
 * the same set so control laws, loss models and analyses work with every stage.
 */
export interface StageSignals {
  /** Inductor current, amperes (positive in the normal power-flow direction). */
  readonly inductorCurrent: string;
  /** Output voltage across the load, volts (negative for the inverting buck-boost). */
  readonly outputVoltage: string;
  /** Switch node voltage, volts. */
  readonly switchNode: string;
  /** Current drawn from the input source, amperes (positive when the source delivers power). */
  readonly inputCurrent: string;
  /** Input voltage at the source terminals, volts. */
  readonly inputVoltage: string;
  /** Load current, amperes. */
  readonly loadCurrent: string;
  /** Main (controlled) switch current and voltage. */
  readonly mainSwitchCurrent: string;
  readonly mainSwitchVoltage: string;
  /** Rectifier (diode or synchronous switch incl. body diode) current and voltage. */
  readonly rectifierCurrent: string;
  readonly rectifierVoltage: string;
}

/** Gate names of a stage. */
export interface StageGates {
  /** Main switch gate. */
  readonly main: string;
  /** Synchronous rectifier gate (synchronous stages only). */
  readonly sync?: string;
}

/**
 * A built stage: the circuit (immutable engine description) plus the names needed to drive
 * and observe it. Control laws add blocks and measurements and return a controller.
 */
export interface Stage {
  readonly kind: StageKind;
  readonly rectification: Rectification;
  readonly circuit: CircuitSpec;
  readonly signals: StageSignals;
  readonly gates: StageGates;
  /** Switching period the stage was designed for, seconds (from its parameters). */
  readonly periodS: number;
  /** Nominal input voltage, volts. */
  readonly inputVolts: number;
}

/** What a control law contributes: extra blocks/measurements in the state, and the event logic. */
export interface ControlLaw {
  readonly blocks: readonly BlockSpec[];
  readonly measurements: readonly MeasurementSpec[];
  /** Makes a fresh controller (controllers hold run state: one per run). */
  readonly createController: () => Controller;
  /** Time base for drift-free scheduling (usually the switching period), seconds. */
  readonly timeBaseS: number;
}

/** Stage and control law merged into one circuit and controller, ready for the engine. */
export interface ClosedStage {
  readonly stage: Stage;
  readonly circuit: CircuitSpec;
  /** Makes a fresh controller for one run. */
  readonly createController: () => Controller;
  readonly timeBaseS: number;
}

/** Merges a control law into a stage's circuit. */
export function closeLoop(stage: Stage, law: ControlLaw): ClosedStage {
  return {
    stage,
    circuit: {
      ...stage.circuit,
      blocks: [...(stage.circuit.blocks ?? []), ...law.blocks],
      measurements: [...(stage.circuit.measurements ?? []), ...law.measurements],
    },
    createController: law.createController,
    timeBaseS: law.timeBaseS,
  };
}
