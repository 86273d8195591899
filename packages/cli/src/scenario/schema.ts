/**
 * The scenario file format (JSON), validated by zod. A scenario names a plant (a raw engine
 * circuit with an optional built-in PWM drive, or a converter stage with a control law), a
 * run (stop time or cycles, what to record, from when, on what grid), optional measured
 * powers, sweeps and expected values.
 *
 * Field names of raw elements are those of the engine's element descriptions, so a raw
 * circuit maps onto `CircuitSpec` one to one; quantities may be written with units.
 * @module
 */
import { z } from 'zod';
import { count, quantity } from './quantity.ts';
import { stageSchema } from './stage-schema.ts';

const id = z.string().min(1).meta({ description: 'unique element id' });
const node = z.string().min(1).meta({ description: 'node name' });
const signal = z.string().min(1).meta({ description: 'signal name (see `edgewise check`)' });

const step = (unit: 'V' | 'A') =>
  z.strictObject({ atS: quantity('s', 'nonnegative', 'time of the step'), value: quantity(unit, 'any', 'new value') });
const sine = (unit: 'V' | 'A') =>
  z.strictObject({
    amplitude: quantity(unit, 'any', 'peak amplitude'),
    frequencyHz: quantity('Hz', 'positive', 'frequency'),
    phaseRad: z.number().optional().meta({ description: 'phase at t = 0, radians' }),
  });

const resistor = z.strictObject({ kind: z.literal('resistor'), id, a: node, b: node, ohms: quantity('Ω', 'positive') });
const inductor = z.strictObject({
  kind: z.literal('inductor'), id, a: node, b: node,
  henries: quantity('H', 'positive'),
  seriesOhms: quantity('Ω', 'nonnegative').optional(),
  initialAmps: quantity('A').optional(),
});
const capacitor = z.strictObject({
  kind: z.literal('capacitor'), id, a: node, b: node,
  farads: quantity('F', 'positive'),
  esrOhms: quantity('Ω', 'nonnegative').optional(),
  initialVolts: quantity('V').optional(),
});
const voltageSource = z.strictObject({
  kind: z.literal('voltage-source'), id, pos: node, neg: node,
  volts: quantity('V'),
  steps: z.array(step('V')).optional(),
  sine: sine('V').optional(),
  seriesOhms: quantity('Ω', 'nonnegative').optional(),
});
const currentSource = z.strictObject({
  kind: z.literal('current-source'), id, from: node, to: node,
  amps: quantity('A'),
  steps: z.array(step('A')).optional(),
  sine: sine('A').optional(),
});
const bodyDiode = z.strictObject({ forwardVolts: quantity('V', 'nonnegative').optional(), onOhms: quantity('Ω', 'nonnegative').optional() });
const switchEl = z.strictObject({
  kind: z.literal('switch'), id, drain: node, source: node,
  gate: z.string().min(1).meta({ description: 'gate signal name driven by the controller' }),
  onOhms: quantity('Ω', 'nonnegative').optional(),
  offOhms: quantity('Ω', 'positive').optional(),
  bodyDiode: bodyDiode.optional(),
  initiallyOn: z.boolean().optional(),
});
const diode = z.strictObject({
  kind: z.literal('diode'), id, anode: node, cathode: node,
  forwardVolts: quantity('V', 'nonnegative').optional(),
  onOhms: quantity('Ω', 'nonnegative').optional(),
  offOhms: quantity('Ω', 'positive').optional(),
});
const controlled = (kind: 'controlled-voltage-source' | 'controlled-current-source') =>
  z.strictObject({ kind: z.literal(kind), id, pos: node, neg: node, control: signal, gain: z.number() });

/** Raw engine element with quantities. */
export const elementSchema = z.discriminatedUnion('kind', [
  resistor, inductor, capacitor, voltageSource, currentSource, switchEl, diode,
  controlled('controlled-voltage-source'), controlled('controlled-current-source'),
]);

const matrix = z.array(z.array(z.number()));
export const blockSchema = z.discriminatedUnion('kind', [
  z.strictObject({ kind: z.literal('ramp'), id, slopePerS: z.number(), initial: z.number().optional() }),
  z.strictObject({
    kind: z.literal('linear-block'), id,
    inputs: z.array(signal).min(1),
    inputGains: z.array(z.number()).optional(),
    stateSpace: z.strictObject({ a: matrix, b: matrix, c: z.array(z.number()), d: z.array(z.number()).optional() }).optional(),
    transferFunction: z.strictObject({ num: z.array(z.number()).min(1), den: z.array(z.number()).min(1) }).optional(),
    initial: z.array(z.number()).optional(),
  }),
  z.strictObject({
    kind: z.literal('sine'), id,
    amplitude: z.number(), frequencyHz: quantity('Hz', 'positive'),
    phaseRad: z.number().optional(), offset: z.number().optional(),
  }),
]);

export const measurementSchema = z.strictObject({
  name: z.string().min(1),
  terms: z.array(z.strictObject({ signal, gain: z.number() })).min(1),
  offset: z.number().optional(),
});

/** Built-in fixed-frequency PWM drive for raw circuits. */
export const pwmDriveSchema = z.strictObject({
  kind: z.literal('pwm'),
  frequency: quantity('Hz', 'positive', 'switching frequency'),
  duty: quantity('1', 'fraction', 'on-time of the main gate over the period'),
  main: z.string().min(1).meta({ description: 'gate on during [0, D T)' }),
  complement: z.string().min(1).optional().meta({ description: 'gate on during [D T + dead time, T - dead time)' }),
  deadTime: quantity('s', 'nonnegative', 'dead time before and after the complement gate').optional(),
  dutySteps: z.array(z.strictObject({ atS: quantity('s', 'nonnegative'), duty: quantity('1', 'fraction') })).optional()
    .meta({ description: 'duty changes, applied from the first cycle that starts at or after atS' }),
});

export const circuitPlantSchema = z.strictObject({
  kind: z.literal('circuit'),
  ground: z.string().min(1).optional(),
  elements: z.array(elementSchema).min(1),
  blocks: z.array(blockSchema).optional(),
  measurements: z.array(measurementSchema).optional(),
  drive: pwmDriveSchema.optional(),
});

const powerSchema = z.strictObject({
  name: z.string().min(1),
  voltage: signal,
  current: signal,
  gain: z.number().optional().meta({ description: 'sign or scale of v*i (default 1)' }),
});

export const runSchema = z
  .strictObject({
    stop: quantity('s', 'positive', 'stop time').optional(),
    cycles: count('number of switching periods to run').optional(),
    from: quantity('s', 'nonnegative', 'start of the recorded window and of the summary metrics').optional(),
    fromCycle: count('start of the window, in switching periods', 0).optional(),
    record: z.array(signal).optional().meta({ description: 'signals written to CSV and summarised (default: node voltages and inductor currents)' }),
    grid: quantity('s', 'positive', 'uniform grid step of recorded samples').optional(),
    pointsPerCycle: count('uniform grid points per switching period').optional(),
    events: z.boolean().optional().meta({ description: 'record the left and right values at every event (default true)' }),
    exactAverages: z.boolean().optional().meta({ description: 'mean and RMS from exact integrals (default true) instead of the samples' }),
    initial: z.record(z.string(), quantity('1')).optional().meta({ description: 'initial values by state name (e.g. "L1.current", "C1")' }),
    powers: z.array(powerSchema).optional(),
    efficiency: z.strictObject({ input: z.array(z.string()).min(1), output: z.array(z.string()).min(1) }).optional()
      .meta({ description: 'efficiency = sum of output powers / sum of input powers (names of powers)' }),
  })
  .superRefine((r, ctx) => {
    if ((r.stop === undefined) === (r.cycles === undefined)) {
      ctx.addIssue({ code: 'custom', message: 'give exactly one of "stop" (seconds) or "cycles"', path: [] });
    }
    if (r.from !== undefined && r.fromCycle !== undefined) ctx.addIssue({ code: 'custom', message: 'give at most one of "from" and "fromCycle"', path: [] });
    if (r.grid !== undefined && r.pointsPerCycle !== undefined) ctx.addIssue({ code: 'custom', message: 'give at most one of "grid" and "pointsPerCycle"', path: [] });
  });

const axisSchema = z.union([
  z.strictObject({ path: z.string().min(1), values: z.array(z.union([z.number(), z.string()])).min(1) }),
  z.strictObject({
    path: z.string().min(1),
    from: z.number(), to: z.number(), points: count('number of points', 1),
    scale: z.enum(['linear', 'log']).optional(),
  }),
]);

export const sweepSchema = z.strictObject({
  grid: z.array(axisSchema).optional().meta({ description: 'cartesian grid; the last axis varies fastest' }),
  monteCarlo: z
    .strictObject({
      seed: z.number().int().min(0),
      samples: count('random samples per grid point'),
      vary: z.array(z.strictObject({
        path: z.string().min(1),
        tolerance: z.number().min(0).meta({ description: 'relative: uniform in [1 - tol, 1 + tol] or normal with sigma = tol / 3' }),
        distribution: z.enum(['uniform', 'normal']).optional(),
      })).min(1),
    })
    .optional(),
  outputs: z.array(z.string().min(1)).min(1).meta({ description: 'summary paths written per point, e.g. "signals.out.mean"' }),
});

export const expectSchema = z.strictObject({
  path: z.string().min(1).meta({ description: 'summary path, e.g. "signals.out.mean"' }),
  value: z.union([z.number(), z.string(), z.boolean()]),
  rtol: z.number().min(0).optional(),
  atol: z.number().min(0).optional(),
  source: z.string().min(1).meta({ description: 'published source of the expected value' }),
  note: z.string().optional(),
});

const analysesSchema = z.strictObject({
  steady: z.strictObject({
    maxIterations: count('Newton iterations').optional(),
    tolerance: z.number().positive().optional(),
    warmupCycles: count('cycles simulated before shooting', 0).optional(),
  }).optional(),
  compare: z.strictObject({
    input: z.enum(['control', 'duty', 'line', 'load-current']).optional()
      .meta({ description: 'perturbed input: control (default; the duty of an open-loop stage, per unit, or the current command of a peak-current stage, per volt; "duty" is the same), line (per volt of input), load-current (per ampere drawn from the output)' }),
    output: signal.optional().meta({ description: 'response signal (default: the stage output voltage)' }),
    model: z.enum(['auto', 'ccm', 'dcm-reduced', 'dcm-full']).optional()
      .meta({ description: 'averaged model: auto (default: CCM, or full-order DCM when the steady state is in DCM), ccm, dcm-reduced or dcm-full' }),
    frequencies: z.array(quantity('Hz', 'positive')).min(1).optional().meta({ description: 'frequencies of the response (instead of a log range)' }),
    fromHz: quantity('Hz', 'positive', 'start of the log range (default fs / 1000)').optional(),
    toHz: quantity('Hz', 'positive', 'end of the log range (default fs / 5)').optional(),
    points: count('frequencies of the log range (default 40)', 2).optional(),
    loadStep: z.strictObject({
      amps: quantity('A', 'any', 'extra current drawn from the output from the step on'),
      cycles: count('switching periods simulated after the step (default 300)').optional(),
    }).optional(),
  }).optional(),
  efficiency: z.strictObject({
    loads: z.array(quantity('1')).min(1).meta({ description: 'load values in the unit of the stage load (ohms or amperes) for the efficiency curve' }),
  }).optional(),
});

const transitionSchema = z.discriminatedUnion('kind', [
  z.strictObject({
    kind: z.literal('linear-overlap'),
    rise: quantity('s', 'nonnegative', 'current rise time at turn-on (0.5 V I rise lost per turn-on)'),
    fall: quantity('s', 'nonnegative', 'current fall time at turn-off (0.5 V I fall lost per turn-off)'),
  }),
  z.strictObject({
    kind: z.literal('energy-table'),
    currents: z.array(quantity('A')).min(2).meta({ description: 'commutated current grid, strictly increasing' }),
    volts: z.array(quantity('V')).min(2).meta({ description: 'blocked voltage grid, strictly increasing' }),
    turnOn: z.array(z.array(quantity('J', 'nonnegative'))).meta({ description: 'turn-on energy, one row per current, one entry per voltage' }),
    turnOff: z.array(z.array(quantity('J', 'nonnegative'))).meta({ description: 'turn-off energy, one row per current, one entry per voltage' }),
    extrapolation: z.enum(['linear', 'clamp']).optional(),
  }),
]);

/** Switching-loss data by element id (accounted per transition, not fed back into the circuit). */
export const switchingLossSchema = z.strictObject({
  switches: z.record(z.string().min(1), z.strictObject({
    transitions: transitionSchema.optional(),
    outputCapacitance: quantity('F', 'nonnegative', 'output capacitance (0.5 C V^2 lost per hard turn-on)').optional(),
    gate: z.strictObject({
      charge: quantity('C', 'nonnegative', 'total gate charge'),
      driveVolts: quantity('V', 'nonnegative', 'gate drive voltage'),
    }).optional(),
    bodyDiodeRecoveredCharge: quantity('C', 'nonnegative', 'reverse-recovery charge of the body diode').optional(),
  })).optional().meta({ description: 'by switch element id (stage plants: Q1, Q2)' }),
  diodes: z.record(z.string().min(1), z.strictObject({
    recoveredCharge: quantity('C', 'nonnegative', 'reverse-recovery charge'),
  })).optional().meta({ description: 'by diode element id (stage plants: D1)' }),
});

export const plotSchema = z.strictObject({ title: z.string().min(1), signals: z.array(signal).min(1) });

/** The whole scenario file. */
export const scenarioSchema = z.strictObject({
  $schema: z.string().optional(),
  name: z.string().min(1).optional(),
  description: z.string().optional(),
  plant: z.discriminatedUnion('kind', [circuitPlantSchema, stageSchema]),
  run: runSchema,
  plots: z.array(plotSchema).optional(),
  analyses: analysesSchema.optional(),
  switchingLosses: switchingLossSchema.optional().meta({ description: 'switching-loss data of the switches and diodes; adds a loss breakdown to run, steady and efficiency summaries of stage plants' }),
  sweep: sweepSchema.optional(),
  expect: z.array(expectSchema).optional(),
});

/** A validated scenario (numbers in SI units). */
export type Scenario = z.output<typeof scenarioSchema>;
export type CircuitPlant = z.output<typeof circuitPlantSchema>;
export type RunSpec = z.output<typeof runSchema>;
export type SweepSpec = z.output<typeof sweepSchema>;
export type SwitchingLossSpec = z.output<typeof switchingLossSchema>;
export type PwmDrive = z.output<typeof pwmDriveSchema>;

/** JSON Schema (draft 2020-12) of the input form of a scenario file, for editors. */
export function scenarioJsonSchema(): unknown {
  return z.toJSONSchema(scenarioSchema, { io: 'input', unrepresentable: 'any' });
}
