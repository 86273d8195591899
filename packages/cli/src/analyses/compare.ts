/**
 * The averaged model against the switching circuit it was derived from, for an open-loop stage
 * plant: DC point, ripple, small-signal frequency response and a load-step transient, with the
 * CCM or DCM averaged model (chosen by the conduction mode of the steady state unless named).
 *
 * The switching side is the stage itself with its duty produced by a comparator against a control
 * source (open loop: a 0-to-1 V sawtooth against the duty; peak current mode: the sensed current
 * plus the compensation ramp against the command), so that a perturbation of that source is
 * one the sampled-data analysis can follow through the guard;
 * a zero-ampere current source at the output carries the load step and the output-impedance
 * perturbation. The averaged side is the CCM state-space average of the same circuit's on and
 * off topologies (models' `ccmAveragedModel`, `dcmAveragedModel`), or Ridley's current-mode
 * model on it (`peakCurrentModel`).
 * @module
 */
import { CircuitModel, type CircuitSpec, type ControlContext, type Controller, type ElementSpec } from '@edgewise/engine';
import {
  ccmAveragedModel,
  dcmAveragedModel,
  measureCycles,
  peakCurrentModel,
  periodicSteadyState,
  validateAveragedModel,
  type AveragedModel,
  type StepFigures,
  type SteadyState,
  type SwitchingSystem,
  type TransferFunction,
  type ValidationReport,
} from '@edgewise/models';
import { InputError, RunFailure } from '../errors.ts';
import type { Plan } from '../scenario/build.ts';
import { buildStagePlant } from '../scenario/build-stage.ts';
import type { Scenario } from '../scenario/schema.ts';
import type { StagePlant } from '../scenario/stage-schema.ts';

/** Id of the control source: the duty (open loop, against a 0-to-1 V sawtooth) or the current command (peak current mode), volts. */
export const CONTROL_SOURCE = 'VCTL';
/** Node of the control source. */
export const CONTROL_NODE = 'ctl';
/** Id of the output current source used for the load step and the output impedance. */
export const LOAD_STEP_SOURCE = 'ISTEP';
const RAMP = 'CTLRAMP';

/** Which input the frequency response perturbs. */
export type CompareInput = 'control' | 'duty' | 'line' | 'load-current';

/** Resolved settings of a comparison (SI units). */
export interface CompareSettings {
  readonly input: CompareInput;
  readonly output: string;
  readonly frequenciesHz: readonly number[];
  readonly loadStep: { readonly amps: number; readonly cycles: number } | undefined;
  /** Averaged model: by the conduction mode of the steady state ('auto'), or the one named. */
  readonly model: 'auto' | 'ccm' | 'dcm-reduced' | 'dcm-full';
}

/** A value of the averaged model next to the switching circuit's. */
export interface SideBySide {
  readonly averaged: number;
  readonly switching: number;
  /** averaged - switching, in the signal's unit. */
  readonly error: number;
  /** error / |switching| (NaN when the switching value is 0). */
  readonly relativeError: number;
}

/** One frequency of the comparison. */
export interface ComparePoint {
  readonly frequencyHz: number;
  readonly averaged: { readonly magnitudeDb: number; readonly phaseDeg: number };
  readonly switching: { readonly magnitudeDb: number; readonly phaseDeg: number };
  /** averaged - switching magnitude, decibels. */
  readonly errorDb: number;
  /** averaged - switching phase, degrees, wrapped to (-180, 180]. */
  readonly errorDeg: number;
}

/** A load-step transient: per-cycle averages of the switching circuit and samples of the averaged model. */
export interface LoadStepResult {
  readonly amps: number;
  /** The compared output signal. */
  readonly output: string;
  readonly stepS: number;
  /** Centres of the switching periods, seconds. */
  readonly timesS: number[];
  /** Per-cycle averages of the output in the switching circuit (exact integrals). */
  readonly switchingAverage: number[];
  /** Exact cycle averages of the averaged model's response. */
  readonly averaged: number[];
  readonly figures: { readonly averaged: StepFigures; readonly switching: StepFigures };
  /** Largest |averaged - switching| cycle average after the step, in the output's unit. */
  readonly maxDeviation: number;
}

/** Everything a comparison computes (the summary JSON is {@link compareJson} of it). */
export interface CompareResult {
  readonly settings: CompareSettings;
  readonly periodS: number;
  readonly duty: number;
  /** The averaged model compared. */
  readonly modelKind: CompareModelKind;
  readonly inductorCurrent: string;
  /** Units of the signals compared ('' when dimensionless). */
  readonly units: Readonly<Record<string, string>>;
  readonly steadyState: SteadyState;
  readonly conductionMode: string | null;
  readonly dc: Readonly<Record<string, SideBySide>>;
  /** Peak-to-peak ripple: the switching circuit's exact one and the model's straight-line estimate. */
  readonly ripple: Readonly<Record<string, { readonly switching: number; readonly firstOrderEstimate: number | null }>>;
  readonly points: ComparePoint[];
  readonly loadStep: LoadStepResult | undefined;
  readonly warnings: string[];
}

/** Log-spaced frequencies from `from` to `to` (inclusive), hertz. */
export function logFrequencies(fromHz: number, toHz: number, points: number): number[] {
  const a = Math.log10(fromHz), b = Math.log10(toHz);
  return Array.from({ length: points }, (_, i) => 10 ** (a + ((b - a) * i) / (points - 1)));
}

/** Reads the compare settings of a scenario; InputError with the JSON path on bad values. */
export function compareSettings(scenario: Scenario, plan: Plan, where: string): CompareSettings {
  const c = scenario.analyses?.compare ?? {};
  const stage = plan.stage!;
  const fs = 1 / stage.periodS;
  const problems: string[] = [];
  if (c.frequencies !== undefined && (c.fromHz !== undefined || c.toHz !== undefined || c.points !== undefined)) {
    problems.push('analyses.compare.frequencies: give either a list of frequencies or fromHz/toHz/points, not both');
  }
  const from = c.fromHz ?? fs / 1000;
  const to = c.toHz ?? fs / 5;
  if (!(to > from)) problems.push(`analyses.compare.toHz: must be above fromHz (${from} Hz), received ${to} Hz`);
  const freqs = c.frequencies ?? logFrequencies(from, to, c.points ?? 40);
  freqs.forEach((f, i) => {
    if (!(f < fs / 2)) problems.push(`analyses.compare.${c.frequencies !== undefined ? `frequencies[${i}]` : 'toHz'}: must be below half the switching frequency (${fs / 2} Hz), received ${f} Hz`);
  });
  if (problems.length > 0) throw new InputError(where, [...new Set(problems)]);
  return {
    input: c.input ?? 'control',
    output: c.output ?? stage.signals.outputVoltage,
    frequenciesHz: freqs,
    loadStep: c.loadStep === undefined ? undefined : { amps: c.loadStep.amps, cycles: c.loadStep.cycles ?? 300 },
    model: c.model ?? 'auto',
  };
}

/**
 * How the switching circuit's duty is made: a sawtooth against a duty source (open loop), or
 * the sensed inductor current plus a compensation ramp against a command source (peak current
 * mode). Either way the perturbed source is an independent source of the circuit.
 */
type Modulator =
  | { readonly kind: 'duty'; readonly duty: number }
  | { readonly kind: 'peak-current'; readonly volts: number; readonly senseOhms: number; readonly slopeVPerS: number; readonly maxDuty: number };

/** The stage plant and its modulator; InputError unless the plant is an open-loop or peak-current stage. */
function modulatorOf(scenario: Scenario, where: string): { plant: StagePlant; modulator: Modulator } {
  const plant = scenario.plant;
  if (plant.kind !== 'stage') {
    throw new InputError(where, ['plant.kind: compare needs a stage plant (the averaged model is built from its on and off topologies)']);
  }
  const control = plant.control;
  if (control.kind !== 'open-loop' && control.kind !== 'peak-current') {
    throw new InputError(where, [`plant.control.kind: compare needs an open-loop or peak-current stage (the averaged models cover the power stage and the current loop), received "${control.kind}"`]);
  }
  if (control.lightLoad === 'diode-emulation' || control.currentLimit !== undefined) {
    throw new InputError(where, ['plant.control: compare does not model diode emulation or a current limit; remove lightLoad and currentLimit']);
  }
  if (control.kind === 'peak-current') {
    const cmd = control.command;
    if (cmd.kind !== 'fixed') throw new InputError(where, ['plant.control.command.kind: compare needs a fixed current command (the outer voltage loop is not part of the averaged model)']);
    if (plant.converter === 'buck-boost') throw new InputError(where, ['plant.converter: the peak current-mode model covers buck and boost stages']);
    const volts = cmd.volts ?? cmd.peakAmps! * control.senseOhms;
    return { plant, modulator: { kind: 'peak-current', volts, senseOhms: control.senseOhms, slopeVPerS: control.slopeCompensationVPerS ?? 0, maxDuty: control.maxDuty ?? 0.95 } };
  }
  const duty = control.duty ?? control.dutySchedule?.[0]?.duty;
  if (duty === undefined || !(duty > 0 && duty < 1)) {
    throw new InputError(where, [`plant.control.duty: compare needs a duty strictly between 0 and 1, received ${String(duty)}`]);
  }
  return { plant, modulator: { kind: 'duty', duty } };
}

/**
 * Clock-set, comparator-reset PWM: the main gate turns on at each clock edge and the ramp
 * restarts; it turns off when the guard's terms rise through the control source (or at the
 * longest on-time). A synchronous switch follows with the stage's dead times.
 */
function comparatorDrive(
  main: string, sync: string | undefined, periodS: number, deadOnS: number, deadOffS: number,
  terms: readonly { signal: string; gain: number }[], ramp: string | undefined, maxOnS: number,
): () => Controller {
  const CLOCK = 1, SYNC_ON = 2, SYNC_OFF = 3, TRIP = 4, MAX_ON = 5;
  return () => {
    let g = -1, c = -1, guard = -1, r = -1;
    const off = (ctx: ControlContext): void => {
      ctx.setGate(g, false);
      ctx.disarm(guard);
      ctx.cancel(MAX_ON);
      if (c >= 0) {
        if (deadOnS > 0) ctx.after(SYNC_ON, deadOnS);
        else ctx.setGate(c, true);
      }
    };
    const clock = (ctx: ControlContext, cycle: number): void => {
      if (c >= 0) ctx.setGate(c, false);
      ctx.setGate(g, true);
      if (r >= 0) ctx.setBlockState(r, 0);
      ctx.arm(guard, TRIP);
      ctx.at(CLOCK, cycle + 1, 0);
      if (maxOnS < periodS) ctx.at(MAX_ON, cycle, maxOnS);
      if (c >= 0 && deadOffS > 0) ctx.at(SYNC_OFF, cycle, periodS - deadOffS);
    };
    return {
      start(ctx) {
        g = ctx.gate(main);
        if (sync !== undefined) c = ctx.gate(sync);
        if (ramp !== undefined) r = ctx.block(ramp);
        guard = ctx.guard({ terms: [...terms, { signal: CONTROL_NODE, gain: -1 }], threshold: 0, direction: 'rising' });
        clock(ctx, 0);
      },
      onEvent(ctx, tag) {
        switch (tag) {
          case CLOCK:
            clock(ctx, ctx.cycle);
            break;
          case TRIP:
          case MAX_ON:
            off(ctx);
            break;
          case SYNC_ON:
            ctx.setGate(c, true);
            break;
          case SYNC_OFF:
            ctx.setGate(c, false);
            break;
        }
      },
    };
  };
}

/** The comparison circuit: the stage (without scheduled steps) plus the control source, the ramp and the output current source. */
interface CompareCircuit {
  readonly sys: SwitchingSystem & { readonly circuit: CircuitModel };
  readonly converter: StagePlant['converter'];
  readonly on: readonly string[];
  readonly off: readonly string[];
  readonly inductorCurrent: string;
  readonly output: string;
  readonly periodS: number;
}

function compareCircuit(plant: StagePlant, mod: Modulator, where: string): CompareCircuit {
  // Steps belong to the run; the comparison sets its own load step.
  const load = plant.load.kind === 'resistor' ? { kind: 'resistor' as const, ohms: plant.load.ohms } : { kind: 'current' as const, amps: plant.load.amps };
  const { steps: _steps, ...input } = plant.input;
  const dt = plant.control.kind === 'open-loop' || plant.control.kind === 'peak-current' ? plant.control.deadTime : undefined;
  const base: StagePlant = { ...plant, input, load, control: { kind: 'open-loop', duty: 0.5, ...(dt !== undefined ? { deadTime: dt } : {}) } };
  const { stage } = buildStagePlant(base, where);
  const T = stage.periodS;
  const out = stage.signals.outputVoltage;
  const extra: ElementSpec[] = [
    { kind: 'voltage-source', id: CONTROL_SOURCE, pos: CONTROL_NODE, neg: '0', volts: mod.kind === 'duty' ? mod.duty : mod.volts },
    // a second terminal at the control node (the engine rejects single-terminal nodes); it draws
    // a current from the ideal source and nothing else
    { kind: 'resistor', id: 'RCTL', a: CONTROL_NODE, b: '0', ohms: 1e6 },
    { kind: 'current-source', id: LOAD_STEP_SOURCE, from: out, to: '0', amps: 0 },
  ];
  const ramp = mod.kind === 'duty' || mod.slopeVPerS > 0 ? RAMP : undefined;
  const spec: CircuitSpec = {
    ...stage.circuit,
    elements: [...stage.circuit.elements, ...extra],
    blocks: [...(stage.circuit.blocks ?? []), ...(ramp !== undefined ? [{ kind: 'ramp' as const, id: RAMP, slopePerS: mod.kind === 'duty' ? 1 / T : mod.slopeVPerS }] : [])],
  };
  // open loop: a 0-to-1 V sawtooth, so one volt of the control source is one unit of duty
  const terms = mod.kind === 'duty'
    ? [{ signal: `${RAMP}.out`, gain: 1 }]
    : [{ signal: stage.signals.inductorCurrent, gain: mod.senseOhms }, ...(ramp !== undefined ? [{ signal: `${RAMP}.out`, gain: 1 }] : [])];
  const maxOn = mod.kind === 'duty' ? T : mod.maxDuty * T;
  const createController = comparatorDrive(stage.gates.main, stage.gates.sync, T, dt?.mainOffToSyncOnS ?? 0, dt?.syncOffToMainOnS ?? 0, terms, ramp, maxOn);
  const sync = stage.rectification === 'synchronous';
  return {
    sys: { circuit: new CircuitModel(spec), createController, timeBaseS: T },
    converter: plant.converter,
    on: ['Q1'],
    off: [sync ? 'Q2' : 'D1'],
    inductorCurrent: stage.signals.inductorCurrent,
    output: out,
    periodS: T,
  };
}

/**
 * Runs the comparison of a plan whose scenario is an open-loop stage. Throws InputError (exit 2)
 * for an unsuitable scenario and RunFailure (exit 1) when the switching circuit has no periodic
 * steady state or a run fails.
 */
export function compareAveragedModel(plan: Plan, where: string): CompareResult {
  const { plant, modulator } = modulatorOf(plan.scenario, where);
  const settings = compareSettings(plan.scenario, plan, where);
  const cc = compareCircuit(plant, modulator, where);
  const model = cc.sys.circuit;
  const known = model.listSignals().map((s) => s.name);
  if (!known.includes(settings.output)) {
    throw new InputError(where, [`analyses.compare.output: unknown signal "${settings.output}"; known signals: ${known.join(', ')}`]);
  }
  const warnings: string[] = [];
  const ss = periodicSteadyState(cc.sys, { ...(plan.scenario.analyses?.steady?.maxIterations !== undefined ? { maxIterations: plan.scenario.analyses.steady.maxIterations } : {}) });
  if (ss.status !== 'converged') throw new RunFailure(`steady state ${ss.status}: ${ss.message}`);
  if (ss.stability !== 'stable') warnings.push(`the switching circuit's orbit is ${ss.stability} (spectral radius ${ss.spectralRadius.toPrecision(4)})`);

  // Conduction mode of the steady-state period picks (or checks) the averaged model.
  const init = Object.fromEntries(ss.stateNames.map((n, i) => [n, ss.state[i]!]));
  const period = measureCycles(cc.sys, { stopS: ss.periodS, signals: [cc.inductorCurrent], inductorCurrent: cc.inductorCurrent, initialState: init });
  const mode = period.cycles[0]?.mode ?? null;
  const source = settings.input === 'control' || settings.input === 'duty' ? CONTROL_SOURCE : settings.input === 'line' ? 'VIN' : LOAD_STEP_SOURCE;
  let avg: AveragedModel;
  let kind: CompareModelKind;
  let duty: number;
  let responseTf: TransferFunction | undefined;
  try {
    if (modulator.kind === 'peak-current') {
      if (settings.model !== 'auto' && settings.model !== 'ccm') throw new InputError(where, [`analyses.compare.model: peak current mode is compared with Ridley's CCM model, received "${settings.model}"`]);
      kind = 'peak-current';
      const pcm = peakCurrentModel(model, {
        converter: cc.converter === 'boost' ? 'boost' : 'buck', on: cc.on, off: cc.off, periodS: cc.periodS,
        inductor: cc.inductorCurrent, senseGain: modulator.senseOhms, rampSlope: modulator.slopeVPerS, command: CONTROL_SOURCE,
      });
      // DC point and ripple from the CCM stage at the current loop's operating duty
      avg = pcm.stage;
      duty = pcm.duty;
      responseTf = source === CONTROL_SOURCE ? pcm.controlToOutput(settings.output) : pcm.inputToOutput(source, settings.output);
      if (mode !== null && mode !== 'ccm') warnings.push(`the switching circuit is not in CCM (${mode}): the current-mode model does not apply`);
      if (settings.loadStep !== undefined) warnings.push('load step: not compared in current mode (the validation steps the averaged stage at a fixed duty)');
    } else {
      duty = modulator.duty;
      kind = settings.model === 'auto' ? (mode === 'dcm' ? 'dcm-full' : 'ccm') : settings.model;
      if (kind === 'ccm' && mode !== null && mode !== 'ccm') warnings.push(`the switching circuit is not in CCM (${mode}): the CCM averaged model does not apply`);
      if (kind !== 'ccm' && mode !== 'dcm') warnings.push(`the switching circuit is not in DCM (${mode ?? 'unknown'}): the DCM averaged model does not apply`);
      avg = kind === 'ccm'
        ? ccmAveragedModel(model, { on: cc.on, off: cc.off, duty, periodS: cc.periodS })
        : dcmAveragedModel(model, { order: kind === 'dcm-full' ? 'full' : 'reduced', on: cc.on, off: cc.off, duty, periodS: cc.periodS, inductor: cc.inductorCurrent });
      // the sawtooth is 0 to 1 V: one volt of the control source is one unit of duty
      responseTf = source === CONTROL_SOURCE ? undefined : avg.inputToOutput(source, settings.output);
    }
  } catch (err) {
    if (err instanceof InputError) throw err;
    throw new RunFailure(`averaged model (${settings.model}): ${(err as Error).message}`);
  }

  let report: ValidationReport;
  try {
    report = validateAveragedModel(cc.sys, avg, {
      output: settings.output,
      signals: [...new Set([settings.output, cc.output, cc.inductorCurrent])],
      response: { source, frequenciesHz: settings.frequenciesHz, ...(responseTf !== undefined ? { averaged: responseTf } : {}) },
      ...(settings.loadStep !== undefined && kind !== 'peak-current' ? { step: { source: LOAD_STEP_SOURCE, value: settings.loadStep.amps, cyclesBefore: 10, cyclesAfter: settings.loadStep.cycles } } : {}),
    });
  } catch (err) {
    throw new RunFailure(`averaged model against the switching circuit: ${(err as Error).message}`);
  }
  const dc: Record<string, SideBySide> = {};
  for (const d of report.dc) dc[d.signal] = { averaged: d.averaged, switching: d.switching, error: d.difference, relativeError: d.relativeDifference ?? Number.NaN };
  const ripple: Record<string, { switching: number; firstOrderEstimate: number | null }> = {};
  for (const r of report.ripple) ripple[r.signal] = { switching: r.switching, firstOrderEstimate: r.averagedEstimate };
  const resp = report.response!;
  const points: ComparePoint[] = resp.frequencyHz.map((f, i) => ({
    frequencyHz: f,
    averaged: { magnitudeDb: resp.averaged.magnitudeDb[i]!, phaseDeg: resp.averaged.phaseDeg[i]! },
    switching: { magnitudeDb: resp.switching.magnitudeDb[i]!, phaseDeg: resp.switching.phaseDeg[i]! },
    errorDb: resp.error.magnitudeDb[i]!,
    errorDeg: resp.error.phaseDeg[i]!,
  }));
  const st = report.step;
  const loadStep: LoadStepResult | undefined = st === null ? undefined : {
    amps: st.toValue - st.fromValue,
    output: st.output,
    stepS: st.stepS,
    timesS: st.timeS,
    switchingAverage: st.switching,
    averaged: st.averaged,
    figures: { averaged: st.averagedFigures, switching: st.switchingFigures },
    maxDeviation: st.error.slice(Math.round(st.stepS / cc.periodS)).reduce((m, e) => Math.max(m, Math.abs(e)), 0),
  };
  return {
    settings,
    periodS: cc.periodS,
    duty,
    modelKind: kind,
    inductorCurrent: cc.inductorCurrent,
    units: Object.fromEntries(model.listSignals().map((x) => [x.name, x.unit === '1' ? '' : x.unit])),
    steadyState: ss,
    conductionMode: mode,
    dc,
    ripple,
    points,
    loadStep,
    warnings,
  };
}

/** Averaged models a comparison uses. */
export type CompareModelKind = 'ccm' | 'dcm-reduced' | 'dcm-full' | 'peak-current';

const MODEL_TEXT: Record<CompareModelKind, string> = {
  'peak-current': 'peak current mode (Ridley 1991) on the CCM averaged stage',
  ccm: 'CCM state-space average (Middlebrook and Cuk 1976)',
  'dcm-reduced': 'DCM average, reduced order (inductor dynamics neglected)',
  'dcm-full': 'DCM average, full order (Sun et al. 2001)',
};

/** Description of an averaged model kind. */
export function modelText(kind: CompareModelKind): string {
  return MODEL_TEXT[kind];
}

/** The summary JSON of a comparison. */
export function compareJson(r: CompareResult, scenario: string): Record<string, unknown> {
  const maxAbs = (xs: number[]): number => xs.reduce((m, x) => Math.max(m, Math.abs(x)), 0);
  const unit = r.settings.input === 'duty' || r.settings.input === 'control' ? (r.modelKind === 'peak-current' ? 'output unit per volt of current command' : 'output unit per unit of duty') : r.settings.input === 'line' ? 'output unit per volt of input' : 'output unit per ampere drawn from the output';
  return {
    scenario,
    analysis: 'compare',
    averagedModel: MODEL_TEXT[r.modelKind],
    periodS: r.periodS,
    duty: r.duty,
    steadyState: { stability: r.steadyState.stability, spectralRadius: r.steadyState.spectralRadius, iterations: r.steadyState.iterations },
    conductionMode: r.conductionMode,
    dc: r.dc,
    ripple: r.ripple,
    frequencyResponse: {
      input: r.settings.input,
      output: r.settings.output,
      unit,
      maxErrorDb: maxAbs(r.points.map((p) => p.errorDb)),
      maxErrorDeg: maxAbs(r.points.map((p) => p.errorDeg)),
      points: r.points,
    },
    ...(r.loadStep !== undefined
      ? {
          loadStep: {
            amps: r.loadStep.amps,
            stepS: r.loadStep.stepS,
            output: r.loadStep.output,
            averaged: r.loadStep.figures.averaged,
            switching: r.loadStep.figures.switching,
            maxDeviation: r.loadStep.maxDeviation,
          },
        }
      : {}),
    warnings: r.warnings,
  };
}
