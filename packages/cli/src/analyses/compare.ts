/**
 * The averaged model against the switching circuit it was derived from, for an open-loop stage
 * plant: DC point, ripple, small-signal frequency response and a load-step transient.
 *
 * The switching side is the stage itself with its open-loop duty produced by a comparator (a
 * 0-to-1 V sawtooth against a control source held at the duty), so that a perturbation of that
 * source is a perturbation of the duty the sampled-data analysis can follow through the guard;
 * a zero-ampere current source at the output carries the load step and the output-impedance
 * perturbation. The averaged side is the CCM state-space average of the same circuit's on and
 * off topologies (models' `ccmAveragedModel`).
 * @module
 */
import { CircuitModel, expmAugmented, type CircuitSpec, type ControlContext, type Controller, type ElementSpec } from '@edgewise/engine';
import {
  ccmAveragedModel,
  frequencyResponseOf,
  measureCycles,
  periodicSteadyState,
  sampledDataResponse,
  stepFigures,
  topologyKeyOf,
  type CcmAveragedModel,
  type ResponsePoint,
  type StepFigures,
  type SteadyState,
  type SwitchingSystem,
} from '@edgewise/models';
import { InputError, RunFailure } from '../errors.ts';
import type { Plan } from '../scenario/build.ts';
import { buildStagePlant } from '../scenario/build-stage.ts';
import type { Scenario } from '../scenario/schema.ts';
import type { StagePlant } from '../scenario/stage-schema.ts';

/** Id of the control source whose voltage is the duty (0-to-1 V sawtooth). */
export const DUTY_SOURCE = 'VDUTY';
/** Node of the duty control source. */
export const DUTY_NODE = 'dutyctl';
/** Id of the output current source used for the load step and the output impedance. */
export const LOAD_STEP_SOURCE = 'ISTEP';
const RAMP = 'DUTYRAMP';

/** Which input the frequency response perturbs. */
export type CompareInput = 'duty' | 'line' | 'load-current';

/** Resolved settings of a comparison (SI units). */
export interface CompareSettings {
  readonly input: CompareInput;
  readonly output: string;
  readonly frequenciesHz: readonly number[];
  readonly loadStep: { readonly amps: number; readonly cycles: number } | undefined;
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
  /** The stage output voltage signal. */
  readonly output: string;
  readonly stepS: number;
  /** Cycle mid times, seconds. */
  readonly timesS: number[];
  /** Per-cycle average, min and max of the output in the switching circuit. */
  readonly switchingAverage: number[];
  readonly switchingMin: number[];
  readonly switchingMax: number[];
  /** The averaged model's output at the cycle mid times. */
  readonly averaged: number[];
  readonly figures: { readonly averaged: StepFigures; readonly switching: StepFigures };
  /** Largest |averaged - per-cycle average| after the step, in the output's unit. */
  readonly maxDeviation: number;
}

/** Everything a comparison computes (the summary JSON is {@link compareJson} of it). */
export interface CompareResult {
  readonly settings: CompareSettings;
  readonly periodS: number;
  readonly duty: number;
  readonly inductorCurrent: string;
  /** Units of the signals compared ('' when dimensionless). */
  readonly units: Readonly<Record<string, string>>;
  readonly steadyState: SteadyState;
  readonly conductionMode: string | null;
  readonly dc: Readonly<Record<string, SideBySide>>;
  /** Peak-to-peak ripple: the switching circuit's, and the first-order estimate |dx/dt on| D T for states. */
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

function wrapDeg(d: number): number {
  let x = d % 360;
  if (x > 180) x -= 360;
  if (x <= -180) x += 360;
  return x;
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
    input: c.input ?? 'duty',
    output: c.output ?? stage.signals.outputVoltage,
    frequenciesHz: freqs,
    loadStep: c.loadStep === undefined ? undefined : { amps: c.loadStep.amps, cycles: c.loadStep.cycles ?? 300 },
  };
}

/** Open-loop duty of a stage plant; InputError unless the plant is an open-loop stage. */
function openLoopDuty(scenario: Scenario, where: string): { plant: StagePlant; duty: number } {
  const plant = scenario.plant;
  if (plant.kind !== 'stage') {
    throw new InputError(where, ['plant.kind: compare needs a stage plant (the averaged model is built from its on and off topologies)']);
  }
  const control = plant.control;
  if (control.kind !== 'open-loop') {
    throw new InputError(where, [`plant.control.kind: compare needs an open-loop stage (the averaged model covers the power stage only), received "${control.kind}"`]);
  }
  if (control.lightLoad === 'diode-emulation' || control.currentLimit !== undefined) {
    throw new InputError(where, ['plant.control: compare does not model diode emulation or a current limit; remove lightLoad and currentLimit']);
  }
  const duty = control.duty ?? control.dutySchedule?.[0]?.duty;
  if (duty === undefined || !(duty > 0 && duty < 1)) {
    throw new InputError(where, [`plant.control.duty: compare needs a duty strictly between 0 and 1, received ${String(duty)}`]);
  }
  return { plant, duty };
}

/**
 * Trailing-edge PWM from a comparator: the main gate turns on at each clock edge and the
 * sawtooth restarts; it turns off when the sawtooth rises through the duty source. A
 * synchronous switch follows with the stage's dead times.
 */
function comparatorDrive(main: string, sync: string | undefined, periodS: number, deadOnS: number, deadOffS: number): () => Controller {
  const CLOCK = 1, SYNC_ON = 2, SYNC_OFF = 3, TRIP = 4;
  return () => {
    let g = -1, c = -1, guard = -1, ramp = -1;
    const clock = (ctx: ControlContext, cycle: number): void => {
      if (c >= 0) ctx.setGate(c, false);
      ctx.setGate(g, true);
      ctx.setBlockState(ramp, 0);
      ctx.arm(guard, TRIP);
      ctx.at(CLOCK, cycle + 1, 0);
      if (c >= 0 && deadOffS > 0) ctx.at(SYNC_OFF, cycle, periodS - deadOffS);
    };
    return {
      start(ctx) {
        g = ctx.gate(main);
        if (sync !== undefined) c = ctx.gate(sync);
        ramp = ctx.block(RAMP);
        guard = ctx.guard({ terms: [{ signal: `${RAMP}.out`, gain: 1 }, { signal: DUTY_NODE, gain: -1 }], threshold: 0, direction: 'rising' });
        clock(ctx, 0);
      },
      onEvent(ctx, tag) {
        switch (tag) {
          case CLOCK:
            clock(ctx, ctx.cycle);
            break;
          case TRIP:
            ctx.setGate(g, false);
            ctx.disarm(guard);
            if (c >= 0) {
              if (deadOnS > 0) ctx.after(SYNC_ON, deadOnS);
              else ctx.setGate(c, true);
            }
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

/** The comparison circuit: the stage (without scheduled steps) plus the duty source, the sawtooth and the output current source. */
interface CompareCircuit {
  readonly spec: CircuitSpec;
  readonly sys: SwitchingSystem & { readonly circuit: CircuitModel };
  readonly stepped: (atS: number, amps: number) => SwitchingSystem;
  readonly on: readonly string[];
  readonly off: readonly string[];
  readonly inductorCurrent: string;
  readonly output: string;
  readonly periodS: number;
}

function compareCircuit(plant: StagePlant, duty: number, where: string): CompareCircuit {
  // Steps belong to the run; the comparison sets its own load step.
  const load = plant.load.kind === 'resistor' ? { kind: 'resistor' as const, ohms: plant.load.ohms } : { kind: 'current' as const, amps: plant.load.amps };
  const { steps: _steps, ...input } = plant.input;
  const base: StagePlant = { ...plant, input, load, control: { kind: 'open-loop', duty, ...(plant.control.kind === 'open-loop' && plant.control.deadTime !== undefined ? { deadTime: plant.control.deadTime } : {}) } };
  const { stage } = buildStagePlant(base, where);
  const T = stage.periodS;
  const out = stage.signals.outputVoltage;
  const extra: ElementSpec[] = [
    { kind: 'voltage-source', id: DUTY_SOURCE, pos: DUTY_NODE, neg: '0', volts: duty },
    // a second terminal at the control node (the engine rejects single-terminal nodes); it draws
    // a current from the ideal source and nothing else
    { kind: 'resistor', id: 'RDUTY', a: DUTY_NODE, b: '0', ohms: 1e6 },
    { kind: 'current-source', id: LOAD_STEP_SOURCE, from: out, to: '0', amps: 0 },
  ];
  const spec: CircuitSpec = {
    ...stage.circuit,
    elements: [...stage.circuit.elements, ...extra],
    blocks: [...(stage.circuit.blocks ?? []), { kind: 'ramp', id: RAMP, slopePerS: 1 / T }],
  };
  const dt = plant.control.kind === 'open-loop' ? plant.control.deadTime : undefined;
  const createController = comparatorDrive(stage.gates.main, stage.gates.sync, T, dt?.mainOffToSyncOnS ?? 0, dt?.syncOffToMainOnS ?? 0);
  const sync = stage.rectification === 'synchronous';
  return {
    spec,
    sys: { circuit: new CircuitModel(spec), createController, timeBaseS: T },
    stepped: (atS, amps) => ({
      circuit: { ...spec, elements: spec.elements.map((e) => (e.id === LOAD_STEP_SOURCE ? { ...e, steps: [{ atS, value: amps }] } as ElementSpec : e)) },
      createController,
      timeBaseS: T,
    }),
    on: ['Q1'],
    off: [sync ? 'Q2' : 'D1'],
    inductorCurrent: stage.signals.inductorCurrent,
    output: out,
    periodS: T,
  };
}

/** Averaged output row (over w = [x; u] of the full circuit) of a signal: D r_on + (1 - D) r_off. */
function averagedRow(model: CircuitModel, cc: CompareCircuit, duty: number, signal: string): Float64Array {
  const r1 = model.topology(topologyKeyOf(model, cc.on)).signalRow(signal);
  const r2 = model.topology(topologyKeyOf(model, cc.off)).signalRow(signal);
  return r1.map((v, j) => duty * v + (1 - duty) * r2[j]!);
}

/** Output of the averaged model after a step of the output current source, sampled at `timesS` (measured from the step). */
function averagedStep(model: CircuitModel, cc: CompareCircuit, avg: CcmAveragedModel, duty: number, amps: number, timesS: readonly number[]): number[] {
  const c = model.circuit;
  const nx = avg.stateNames.length, nu = c.nu;
  const idx = avg.stateNames.map((n) => c.stateNames.indexOf(n));
  const u = c.initialState.slice(c.nx);
  u[c.inputNames.indexOf(LOAD_STEP_SOURCE)]! += amps;
  const row = averagedRow(model, cc, duty, cc.output);
  const n = c.nx + nu;
  return timesS.map((t) => {
    const x = new Float64Array(nx);
    if (t > 0) {
      // exact solution of the linear averaged model from its DC point: [x; u](t) = expm([[A, B], [0, 0]] t) [X; u]
      const E = expmAugmented(avg.a, avg.b, nx, nu, t);
      const m = nx + nu;
      for (let i = 0; i < nx; i++) {
        let s = 0;
        for (let j = 0; j < nx; j++) s += E[i * m + j]! * avg.dcState[j]!;
        for (let j = 0; j < nu; j++) s += E[i * m + nx + j]! * u[j]!;
        x[i] = s;
      }
    } else x.set(avg.dcState);
    const w = new Float64Array(n);
    idx.forEach((k, i) => (w[k] = x[i]!));
    w.set(t > 0 ? u : c.initialState.slice(c.nx), c.nx);
    let y = 0;
    for (let j = 0; j < n; j++) y += row[j]! * w[j]!;
    return y;
  });
}

function sideBySide(averaged: number, switching: number): SideBySide {
  const error = averaged - switching;
  return { averaged, switching, error, relativeError: switching !== 0 ? error / Math.abs(switching) : Number.NaN };
}

/**
 * Runs the comparison of a plan whose scenario is an open-loop stage. Throws InputError (exit 2)
 * for an unsuitable scenario and RunFailure (exit 1) when the switching circuit has no periodic
 * steady state or a run fails.
 */
export function compareAveragedModel(plan: Plan, where: string): CompareResult {
  const { plant, duty } = openLoopDuty(plan.scenario, where);
  const settings = compareSettings(plan.scenario, plan, where);
  const cc = compareCircuit(plant, duty, where);
  const model = cc.sys.circuit;
  const known = model.listSignals().map((s) => s.name);
  if (!known.includes(settings.output)) {
    throw new InputError(where, [`analyses.compare.output: unknown signal "${settings.output}"; known signals: ${known.join(', ')}`]);
  }
  const warnings: string[] = [];
  const ss = periodicSteadyState(cc.sys, { ...(plan.scenario.analyses?.steady?.maxIterations !== undefined ? { maxIterations: plan.scenario.analyses.steady.maxIterations } : {}) });
  if (ss.status !== 'converged') throw new RunFailure(`steady state ${ss.status}: ${ss.message}`);
  if (ss.stability !== 'stable') warnings.push(`the switching circuit's orbit is ${ss.stability} (spectral radius ${ss.spectralRadius.toPrecision(4)})`);

  let avg: CcmAveragedModel;
  try {
    avg = ccmAveragedModel(model, { on: cc.on, off: cc.off, duty });
  } catch (err) {
    throw new RunFailure(`averaged model: ${(err as Error).message}`);
  }

  // DC point and ripple over one steady-state period.
  const signals = [...new Set([settings.output, cc.output, cc.inductorCurrent])];
  const init = Object.fromEntries(ss.stateNames.map((n, i) => [n, ss.state[i]!]));
  const period = measureCycles(cc.sys, { stopS: ss.periodS, signals, inductorCurrent: cc.inductorCurrent, initialState: init });
  if (period.run.status === 'failed') throw new RunFailure(`simulation failed (${period.run.error?.code ?? 'failed'}): ${period.run.message}`);
  const cyc = period.cycles[0]!;
  const mode = cyc.mode;
  if (mode !== null && mode !== 'ccm') warnings.push(`the switching circuit is not in CCM (${mode}): the CCM averaged model does not apply`);
  const dc: Record<string, SideBySide> = {};
  const ripple: Record<string, { switching: number; firstOrderEstimate: number | null }> = {};
  const c = model.circuit;
  const tOn = model.topology(topologyKeyOf(model, cc.on));
  const wDc = new Float64Array(c.nx + c.nu);
  avg.stateNames.forEach((n, i) => (wDc[c.stateNames.indexOf(n)] = avg.dcState[i]!));
  wDc.set(c.initialState.slice(c.nx), c.nx);
  for (const s of signals) {
    dc[s] = sideBySide(avg.dcValue(s), cyc.signals[s]!.average);
    // First-order (small-ripple) estimate for a state: its slope during the on-interval at the
    // DC point times D T (Erickson and Maksimovic, ch. 2); zero where the ripple is second order.
    const state = s === cc.inductorCurrent ? s : s === cc.output && !((plant.outputCapacitor.esrOhms ?? 0) > 0) ? 'C1.charge' : undefined;
    let est: number | null = null;
    if (state !== undefined) {
      const k = c.stateNames.indexOf(state);
      let slope = 0;
      for (let j = 0; j < c.nx + c.nu; j++) slope += tOn.m[k * (c.nx + c.nu) + j]! * wDc[j]!;
      est = Math.abs(slope) * duty * cc.periodS;
    }
    ripple[s] = { switching: cyc.signals[s]!.ripple, firstOrderEstimate: est };
  }

  // Frequency response.
  const source = settings.input === 'duty' ? DUTY_SOURCE : settings.input === 'line' ? 'VIN' : LOAD_STEP_SOURCE;
  const tf = settings.input === 'duty' ? avg.controlToOutput(settings.output) : avg.inputToOutput(source, settings.output);
  let sw: ResponsePoint[];
  try {
    sw = sampledDataResponse(model, ss, source, settings.output, settings.frequenciesHz);
  } catch (err) {
    throw new RunFailure(`frequency response of the switching circuit: ${(err as Error).message}`);
  }
  const av = frequencyResponseOf(tf, settings.frequenciesHz);
  const points: ComparePoint[] = settings.frequenciesHz.map((f, i) => {
    const a = av[i]!, s = sw[i]!;
    return {
      frequencyHz: f,
      averaged: { magnitudeDb: a.magnitudeDb, phaseDeg: a.phaseDeg },
      switching: { magnitudeDb: s.magnitudeDb, phaseDeg: s.phaseDeg },
      errorDb: a.magnitudeDb - s.magnitudeDb,
      errorDeg: wrapDeg(a.phaseDeg - s.phaseDeg),
    };
  });

  // Load step from the steady state, a few periods in.
  let loadStep: LoadStepResult | undefined;
  if (settings.loadStep !== undefined) {
    const { amps, cycles } = settings.loadStep;
    const before = 10;
    const stepS = before * cc.periodS;
    const sys = cc.stepped(stepS, amps);
    const rep = measureCycles(sys, { stopS: (before + cycles) * cc.periodS, signals: [cc.output], initialState: init });
    if (rep.run.status === 'failed') throw new RunFailure(`load step: simulation failed (${rep.run.error?.code ?? 'failed'}): ${rep.run.message}`);
    const mids = rep.cycles.map((k) => 0.5 * (k.startS + k.endS));
    const swAvg = rep.cycles.map((k) => k.signals[cc.output]!.average);
    const avgY = averagedStep(model, cc, avg, duty, amps, mids.map((t) => t - stepS));
    let maxDev = 0;
    mids.forEach((t, i) => {
      if (t > stepS) maxDev = Math.max(maxDev, Math.abs(avgY[i]! - swAvg[i]!));
    });
    const fig = (v: number[]): StepFigures => stepFigures(mids, v, { stepS });
    loadStep = {
      amps,
      output: cc.output,
      stepS,
      timesS: mids,
      switchingAverage: swAvg,
      switchingMin: rep.cycles.map((k) => k.signals[cc.output]!.min),
      switchingMax: rep.cycles.map((k) => k.signals[cc.output]!.max),
      averaged: avgY,
      figures: { averaged: fig(avgY), switching: fig(swAvg) },
      maxDeviation: maxDev,
    };
  }
  return {
    settings,
    periodS: cc.periodS,
    duty,
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

/** The summary JSON of a comparison. */
export function compareJson(r: CompareResult, scenario: string): Record<string, unknown> {
  const maxAbs = (xs: number[]): number => xs.reduce((m, x) => Math.max(m, Math.abs(x)), 0);
  const unit = r.settings.input === 'duty' ? 'output unit per unit of duty' : r.settings.input === 'line' ? 'output unit per volt of input' : 'output unit per ampere drawn from the output';
  return {
    scenario,
    analysis: 'compare',
    averagedModel: 'CCM state-space average (Middlebrook and Cuk 1976)',
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
