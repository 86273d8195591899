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
  /** Load current from the output node through the load to ground, amperes (negative for a normal load of the inverting buck-boost). */
  readonly loadCurrent: string;
  /** Main (controlled) switch current and voltage. */
  readonly mainSwitchCurrent: string;
  readonly mainSwitchVoltage: string;
  /** Rectifier (diode or synchronous switch incl. body diode) current in its conducting direction, and voltage in its blocking direction (positive while it blocks). */
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
  /**
   * Gate changes the stage makes by itself at given times (switched load resistors for
   * resistive load steps). {@link closeLoop} applies them; a controller used without
   * closeLoop must apply them itself (see {@link withGateSchedule}).
   */
  readonly gateSchedule?: readonly { readonly atS: number; readonly gate: string; readonly on: boolean }[];
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
    createController: stage.gateSchedule && stage.gateSchedule.length > 0
      ? () => withGateSchedule(law.createController(), stage.gateSchedule!)
      : law.createController,
    timeBaseS: law.timeBaseS,
  };
}

/** Timer tags at or below this value are reserved for the stage's gate schedule. */
const SCHEDULE_TAG_BASE = -1_000_000;

/**
 * Wraps a controller so that it also applies a stage's gate schedule (timer tags
 * <= -1e6 are reserved for it; the wrapped controller never sees them).
 */
export function withGateSchedule(
  inner: Controller,
  schedule: readonly { readonly atS: number; readonly gate: string; readonly on: boolean }[],
): Controller {
  let gates: number[] = [];
  return {
    start(ctx) {
      gates = schedule.map((e) => ctx.gate(e.gate));
      schedule.forEach((e, i) => {
        const cycle = Math.floor(e.atS / ctx.timeBaseS);
        ctx.at(SCHEDULE_TAG_BASE - i, cycle, e.atS - cycle * ctx.timeBaseS);
      });
      inner.start(ctx);
    },
    onEvent(ctx, tag) {
      if (tag <= SCHEDULE_TAG_BASE) {
        const i = SCHEDULE_TAG_BASE - tag;
        ctx.setGate(gates[i]!, schedule[i]!.on);
        return;
      }
      inner.onEvent(ctx, tag);
    },
  };
}
