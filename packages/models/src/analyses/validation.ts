/**
 * The validation report: an averaged model set beside the switching circuit it was derived
 * from. DC point (the exact cycle average at the periodic steady state against the model's
 * operating point), ripple (exact against the model's straight-line estimate), frequency
 * response (sampled-data linearization of the switching circuit against the model's transfer
 * function) and a step of a source (cycle averages of the switching run against the exact
 * cycle averages of the model's linear response). Plain JSON: arrays of numbers and strings.
 */
import { CircuitModel, expmAugmented, type CircuitSpec, type ElementSpec } from '@edgewise/engine';
import type { AveragedModel, TransferFunction } from './averaging.ts';
import { measureCycles, stepFigures, type StepFigures } from './cycles.ts';
import { sampledDataResponse } from './frequency-response.ts';
import { bode, wrapDeg } from './linalg.ts';
import { periodicSteadyState, type ShootingOptions, type SteadyState } from './shooting.ts';
import { modelOf, type SwitchingSystem } from './trace.ts';

/** Options of {@link validateAveragedModel}. Only `output` is required. */
export interface ValidationOptions {
  /** Signal compared in the frequency response and the source step (engine signal name). */
  readonly output: string;
  /** Signals whose DC point and ripple are compared (default: `output` and the model's states). */
  readonly signals?: readonly string[];
  /**
   * Frequency response from an independent source of the switching circuit to `output`
   * (sampled-data linearization), against `averaged` (default: the model's
   * `controlToOutput(output)` times `gain`, e.g. the modulator gain 1/Vm when the source is the
   * control voltage of a PWM comparator; gain default 1).
   */
  readonly response?: {
    readonly source: string;
    /** Frequencies, hertz (each > 0 and below half the switching frequency). */
    readonly frequenciesHz: readonly number[];
    readonly averaged?: TransferFunction;
    readonly gain?: number;
  };
  /**
   * A step of an independent source (a load current source for a load step, or the input
   * source for a line step) from its steady-state value to `value` (its unit), after
   * `cyclesBefore` switching periods (default 5), followed for `cyclesAfter` periods.
   */
  readonly step?: {
    readonly source: string;
    readonly value: number;
    readonly cyclesBefore?: number;
    readonly cyclesAfter: number;
    /** Settling band as a fraction of the final value's magnitude (default 0.02, common practice). */
    readonly bandFraction?: number;
  };
  /** Options of the steady-state shooting (clock sections only). */
  readonly shooting?: Omit<ShootingOptions, 'section'>;
}

/** DC point of one signal, side by side. */
export interface DcComparison {
  readonly signal: string;
  /** Cycle average over the periodic steady state of the switching circuit (exact). */
  readonly switching: number;
  /** Operating point of the averaged model. */
  readonly averaged: number;
  /** averaged - switching. */
  readonly difference: number;
  /** difference / |switching| (null when switching is 0). */
  readonly relativeDifference: number | null;
}

/** Peak-to-peak ripple of one signal, side by side. */
export interface RippleComparison {
  readonly signal: string;
  /** Exact max - min over the steady-state period. */
  readonly switching: number;
  /** The model's straight-line estimate, or null when it has none. */
  readonly averagedEstimate: number | null;
}

/** Frequency response side by side (arrays indexed like `frequencyHz`). */
export interface ResponseComparison {
  readonly source: string;
  readonly output: string;
  readonly frequencyHz: number[];
  readonly switching: { readonly magnitudeDb: number[]; readonly phaseDeg: number[] };
  readonly averaged: { readonly magnitudeDb: number[]; readonly phaseDeg: number[] };
  /** averaged - switching: magnitude in dB, phase in degrees wrapped to (-180, 180]. */
  readonly error: { readonly magnitudeDb: number[]; readonly phaseDeg: number[] };
}

/** Step figures without the band bookkeeping (JSON-friendly). */
export type StepSummary = StepFigures;

/** A source step side by side: one value per switching period. */
export interface StepComparison {
  readonly source: string;
  readonly output: string;
  readonly fromValue: number;
  readonly toValue: number;
  /** Time of the step, seconds from the start of the compared run (at a cycle boundary). */
  readonly stepS: number;
  /** Centre of each switching period, seconds. */
  readonly timeS: number[];
  /** Cycle averages of the output in the switching run (exact integrals). */
  readonly switching: number[];
  /** Cycle averages of the averaged model's response (exact: LTI with an integrator state, via the matrix exponential). */
  readonly averaged: number[];
  /** averaged - switching. */
  readonly error: number[];
  readonly switchingFigures: StepSummary;
  readonly averagedFigures: StepSummary;
}

/** The validation report (plain JSON). */
export interface ValidationReport {
  readonly modelKind: AveragedModel['kind'];
  readonly output: string;
  /** Switching period of the steady state, seconds. */
  readonly periodS: number;
  readonly dc: DcComparison[];
  readonly ripple: RippleComparison[];
  readonly response: ResponseComparison | null;
  readonly step: StepComparison | null;
}

function sourceElement(spec: CircuitSpec, id: string, where: string): ElementSpec & { kind: 'voltage-source' | 'current-source' } {
  const el = spec.elements.find((e) => e.id === id);
  if (el === undefined || (el.kind !== 'voltage-source' && el.kind !== 'current-source')) {
    const ids = spec.elements.filter((e) => e.kind === 'voltage-source' || e.kind === 'current-source').map((e) => e.id);
    throw new RangeError(`${where}: "${id}" is not an independent source of the circuit; sources: ${ids.join(', ')}`);
  }
  return el;
}

/**
 * Exact cycle averages of the output of the small-signal model dx = A x + B du, y = c x + d du
 * after a step du of input `k` at cycle `before`: the output's integral is carried as one more
 * state, and each period is one matrix exponential of the augmented system (Van Loan 1978).
 */
function averagedStep(avg: AveragedModel, output: string, k: number, delta: number, before: number, after: number, T: number): number[] {
  const ssm = avg.smallSignal(output);
  const nx = ssm.nx, nu = ssm.nu, N = nx + 1;
  const a = new Float64Array(N * N), b = new Float64Array(N);
  for (let i = 0; i < nx; i++) {
    for (let j = 0; j < nx; j++) a[i * N + j] = ssm.a[i * nx + j]!;
    b[i] = ssm.b[i * nu + k]! * delta;
  }
  for (let j = 0; j < nx; j++) a[nx * N + j] = ssm.c[j]!;
  b[nx] = ssm.d[k]! * delta;
  // [[Phi, Gamma], [0, 1]] for one period with the (scaled) step input held at 1
  const E = expmAugmented(a, b, N, 1, T);
  const y0 = avg.dcValue(output);
  const out: number[] = [];
  let z = new Float64Array(N);
  const next = new Float64Array(N);
  for (let cyc = 0; cyc < before + after; cyc++) {
    const on = cyc >= before ? 1 : 0;
    for (let i = 0; i < N; i++) {
      let s = E[i * (N + 1) + N]! * on;
      for (let j = 0; j < nx; j++) s += E[i * (N + 1) + j]! * z[j]!;
      next[i] = s;
    }
    // the integral restarts each period: its end value over T is the cycle average
    out.push(y0 + next[nx]! / T);
    next[nx] = 0;
    z = next.slice();
  }
  return out;
}

/**
 * Puts an averaged model beside the switching circuit it was derived from (fixed-frequency
 * systems: the steady state is found by shooting on the clock section). Throws a RangeError
 * naming the option for bad input, and an Error naming the cause when the steady state cannot
 * be found.
 */
export function validateAveragedModel(sys: SwitchingSystem, averaged: AveragedModel, options: ValidationOptions): ValidationReport {
  const model = modelOf(sys);
  const spec = model.circuit.spec;
  const o = options;
  if (typeof o?.output !== 'string') throw new RangeError('output must name a signal');
  try {
    model.resolve(o.output);
  } catch (err) {
    throw new RangeError(`output: ${(err as Error).message}`);
  }
  const signals = o.signals ?? [o.output, ...averaged.stateNames.filter((s) => s !== o.output)];
  for (const s of signals) {
    try {
      model.resolve(s);
    } catch (err) {
      throw new RangeError(`signals: ${(err as Error).message}`);
    }
  }
  const resp = o.response;
  if (resp !== undefined) {
    sourceElement(spec, resp.source, 'response.source');
    if (!Array.isArray(resp.frequenciesHz) || resp.frequenciesHz.length === 0) throw new RangeError('response.frequenciesHz must list at least one frequency');
    if (resp.gain !== undefined && !Number.isFinite(resp.gain)) throw new RangeError(`response.gain must be a finite number, got ${String(resp.gain)}`);
  }
  const st = o.step;
  if (st !== undefined) {
    const stepEl = sourceElement(spec, st.source, 'step.source');
    if (!Number.isFinite(st.value)) throw new RangeError(`step.value must be a finite number, got ${String(st.value)}`);
    if (!(Number.isInteger(st.cyclesAfter) && st.cyclesAfter >= 2)) throw new RangeError(`step.cyclesAfter must be an integer >= 2, got ${String(st.cyclesAfter)}`);
    const cb = st.cyclesBefore ?? 5;
    if (!(Number.isInteger(cb) && cb >= 1)) throw new RangeError(`step.cyclesBefore must be an integer >= 1, got ${String(cb)}`);
    if (stepEl.steps !== undefined && stepEl.steps.length > 0) throw new RangeError(`step.source: "${st.source}" already has steps`);
  }

  const ssr = periodicSteadyState({ ...sys, circuit: model }, { ...(o.shooting ?? {}), section: { kind: 'clock' } });
  if (ssr.status !== 'converged') throw new Error(`no periodic steady state of the switching circuit: ${ssr.message}`);
  const ss: SteadyState = ssr;
  const T = ss.periodS;

  // DC point and ripple over one steady-state period
  const one = measureCycles({ ...sys, circuit: model }, { stopS: T, signals, initialState: ss.state });
  const cyc = one.cycles[0];
  if (cyc === undefined) throw new Error('the steady-state period produced no cycle');
  const dc: DcComparison[] = signals.map((signal) => {
    const sw = cyc.signals[signal]!.average;
    const av = averaged.dcValue(signal);
    const diff = av - sw;
    return { signal, switching: sw, averaged: av, difference: diff, relativeDifference: sw === 0 ? null : diff / Math.abs(sw) };
  });
  const ripple: RippleComparison[] = signals.map((signal) => ({
    signal,
    switching: cyc.signals[signal]!.ripple,
    averagedEstimate: averaged.rippleEstimate(signal),
  }));

  let response: ResponseComparison | null = null;
  if (resp !== undefined) {
    const pts = sampledDataResponse(model, ss, resp.source, o.output, resp.frequenciesHz);
    const gain = resp.gain ?? 1;
    const base = resp.averaged ?? averaged.controlToOutput(o.output);
    const sw = { magnitudeDb: [] as number[], phaseDeg: [] as number[] };
    const av = { magnitudeDb: [] as number[], phaseDeg: [] as number[] };
    const err = { magnitudeDb: [] as number[], phaseDeg: [] as number[] };
    for (const p of pts) {
      const v = base({ re: 0, im: 2 * Math.PI * p.frequencyHz });
      const b = bode({ re: v.re * gain, im: v.im * gain });
      sw.magnitudeDb.push(p.magnitudeDb);
      sw.phaseDeg.push(p.phaseDeg);
      av.magnitudeDb.push(b.magnitudeDb);
      av.phaseDeg.push(b.phaseDeg);
      err.magnitudeDb.push(b.magnitudeDb - p.magnitudeDb);
      err.phaseDeg.push(wrapDeg(b.phaseDeg - p.phaseDeg));
    }
    response = { source: resp.source, output: o.output, frequencyHz: pts.map((p) => p.frequencyHz), switching: sw, averaged: av, error: err };
  }

  let step: StepComparison | null = null;
  if (st !== undefined) {
    const before = st.cyclesBefore ?? 5;
    const after = st.cyclesAfter;
    const k = model.circuit.inputNames.indexOf(st.source);
    const from = ss.state[model.circuit.nx + k]!;
    const stepS = before * T;
    const elements = spec.elements.map((e) => (e.id === st.source ? ({ ...e, steps: [{ atS: stepS, value: st.value }] } as ElementSpec) : e));
    const stepped = new CircuitModel({ ...spec, elements });
    const run = measureCycles({ ...sys, circuit: stepped }, { stopS: (before + after) * T, signals: [o.output], initialState: ss.state });
    const switching = run.cycles.slice(0, before + after).map((c) => c.signals[o.output]!.average);
    const timeS = switching.map((_, i) => (i + 0.5) * T);
    const avgWave = averagedStep(averaged, o.output, k, st.value - from, before, after, T);
    const band = st.bandFraction ?? 0.02;
    const fig = (v: number[]): StepSummary => ({ ...stepFigures(timeS, v, { stepS, bandFraction: band }) });
    step = {
      source: st.source, output: o.output, fromValue: from, toValue: st.value, stepS, timeS,
      switching, averaged: avgWave, error: avgWave.map((v, i) => v - switching[i]!),
      switchingFigures: fig(switching), averagedFigures: fig(avgWave),
    };
  }
  const report: ValidationReport = { modelKind: averaged.kind, output: o.output, periodS: T, dc, ripple, response, step };
  checkFinite(report, 'report');
  return report;
}

/** Throws naming the first non-finite number of the report (a model that returned NaN, say). */
function checkFinite(v: unknown, path: string): void {
  if (typeof v === 'number') {
    if (!Number.isFinite(v)) throw new Error(`${path} is ${String(v)}: the averaged model or the switching run produced a non-finite value there`);
  } else if (Array.isArray(v)) {
    for (let i = 0; i < v.length; i++) checkFinite(v[i], `${path}[${i}]`);
  } else if (v !== null && typeof v === 'object') {
    for (const [k, x] of Object.entries(v)) checkFinite(x, `${path}.${k}`);
  }
}
