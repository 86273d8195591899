/**
 * Per-cycle metrics of a run: average and RMS from the engine's exact integrals read at cycle
 * boundaries, minimum and maximum on the exact segment solutions, duty and switching frequency
 * from the gate, conduction mode from the inductor current, and the cycle where the run reached
 * steady state. Also the figures of a load-step response.
 */
import { Simulation, type CircuitModel, type ControlContext, type RunResult, type TraceListener } from '@edgewise/engine';
import { modelOf, propagator, TimingController, TRACER_TAG, type SwitchingSystem } from './trace.ts';

/** Where cycles start. */
export type CycleBoundaries =
  /** Every `periodS` (default the system's time base) from `phaseS` on (fixed-frequency control). */
  | { readonly kind: 'clock'; readonly periodS?: number; readonly phaseS?: number }
  /** At every turn-on of `gate` (variable-frequency control). */
  | { readonly kind: 'gate-on'; readonly gate: string };

/**
 * Conduction mode of one cycle, judged from the inductor current:
 * `ccm` stays above zero; `boundary` touches zero without resting there; `dcm` rests at zero for
 * more than `boundaryFraction` of the cycle; `ccm-negative` reverses (forced CCM at light load);
 * `skipped` had no turn-on of the gate.
 */
export type ConductionMode = 'ccm' | 'boundary' | 'dcm' | 'ccm-negative' | 'skipped';

/** Metrics of one signal over one cycle (in the signal's unit). */
export interface SignalCycleMetrics {
  readonly average: number;
  readonly min: number;
  readonly max: number;
  /** Peak-to-peak ripple, max - min. */
  readonly ripple: number;
  /** Root mean square over the cycle (exact integral of the square). */
  readonly rms: number;
}

/** One cycle. */
export interface CycleMetrics {
  readonly index: number;
  readonly startS: number;
  readonly endS: number;
  /** Length of the cycle, seconds. */
  readonly durationS: number;
  readonly signals: Readonly<Record<string, SignalCycleMetrics>>;
  /** Fraction of the cycle the gate was on. */
  readonly duty: number;
  /** Turn-ons of the gate inside the cycle. */
  readonly turnOns: number;
  /** 1 / (time from the previous turn-on to the first turn-on of this cycle), hertz; null without one. */
  readonly switchingFrequencyHz: number | null;
  /** Conduction mode (null when no inductor current was named). */
  readonly mode: ConductionMode | null;
}

/** Options of {@link measureCycles}. Only `stopS` and `signals` are required. */
export interface CycleMetricsOptions {
  /** Length of the run, seconds. */
  readonly stopS: number;
  /** Signals to measure (engine signal names). */
  readonly signals: readonly string[];
  /** Cycle boundaries (default: the system's clock, `{ kind: 'clock' }`). */
  readonly boundaries?: CycleBoundaries;
  /** Gate whose duty and switching frequency are reported (default: the boundaries' gate, else the circuit's first gate). */
  readonly gate?: string;
  /** Inductor current signal for the conduction mode (default none: mode null). */
  readonly inductorCurrent?: string;
  /** A cycle is DCM when its current rests at zero longer than this fraction (default 0.01). */
  readonly boundaryFraction?: number;
  /** Steady state: every later cycle's average, min and max change by at most this times the signal's scale (default 1e-4). */
  readonly steadyTolerance?: number;
  readonly initialState?: Float64Array | Readonly<Record<string, number>>;
}

/** Result of {@link measureCycles}. */
export interface CycleReport {
  readonly cycles: readonly CycleMetrics[];
  /** Lowest and highest per-cycle switching frequency over the run, hertz (null when the gate never switched twice). */
  readonly lowestFrequencyHz: number | null;
  readonly highestFrequencyHz: number | null;
  /** The lowest switching frequency falls in the audio band (< 20 kHz, common practice). */
  readonly audible: boolean;
  /** First cycle from which every later cycle is within the steady tolerance of the one before (null if never). */
  readonly steadyStateCycle: number | null;
  readonly run: RunResult;
}

/** Audio band upper edge, hertz (common practice). */
export const AUDIO_BAND_HZ = 20_000;

interface SegStat {
  min: number[];
  max: number[];
}

/**
 * Minimum and maximum of signal rows along an exact segment: values and slopes at 8 equal
 * sub-steps of the exact solution, and inside each sub-step the extrema of the cubic Hermite
 * interpolant (its error is below h^4/384 max|f''''| with h an eighth of the segment: far below
 * rounding for the short segments of switching circuits).
 */
function segmentExtrema(model: CircuitModel, key: number, h: number, w0: Float64Array, rows: Float64Array[], drows: Float64Array[], out: SegStat): void {
  const t = model.topology(key);
  const nx = t.nx, n = t.n;
  const K = 8;
  const E = propagator(model, key, h / K);
  let w = new Float64Array(w0);
  const next = new Float64Array(n);
  const nr = rows.length;
  const f0 = new Float64Array(nr), d0 = new Float64Array(nr);
  const dot = (r: Float64Array, v: Float64Array): number => {
    let s = 0;
    for (let j = 0; j < n; j++) s += r[j]! * v[j]!;
    return s;
  };
  for (let q = 0; q < nr; q++) {
    f0[q] = dot(rows[q]!, w);
    d0[q] = dot(drows[q]!, w);
    out.min[q] = Math.min(out.min[q]!, f0[q]!);
    out.max[q] = Math.max(out.max[q]!, f0[q]!);
  }
  const dt = h / K;
  for (let k = 0; k < K; k++) {
    for (let i = 0; i < nx; i++) {
      let s = 0;
      for (let j = 0; j < n; j++) s += E[i * n + j]! * w[j]!;
      next[i] = s;
    }
    for (let j = nx; j < n; j++) next[j] = w[j]!;
    for (let q = 0; q < nr; q++) {
      const f1 = dot(rows[q]!, next), d1 = dot(drows[q]!, next);
      const a = f0[q]!, m0 = d0[q]! * dt, m1 = d1 * dt;
      // p'(s) = A s^2 + B s + C for the Hermite cubic on s in [0, 1]
      const A = 6 * a + 3 * m0 - 6 * f1 + 3 * m1, B = -6 * a - 4 * m0 + 6 * f1 - 2 * m1, C = m0;
      const consider = (s: number): void => {
        if (!(s > 0 && s < 1)) return;
        const s2 = s * s, s3 = s2 * s;
        const v = (2 * s3 - 3 * s2 + 1) * a + (s3 - 2 * s2 + s) * m0 + (-2 * s3 + 3 * s2) * f1 + (s3 - s2) * m1;
        if (v < out.min[q]!) out.min[q] = v;
        if (v > out.max[q]!) out.max[q] = v;
      };
      if (Math.abs(A) > 1e-300) {
        const disc = B * B - 4 * A * C;
        if (disc >= 0) {
          const sq = Math.sqrt(disc);
          consider((-B - sq) / (2 * A));
          consider((-B + sq) / (2 * A));
        }
      } else if (Math.abs(B) > 1e-300) consider(-C / B);
      out.min[q] = Math.min(out.min[q]!, f1);
      out.max[q] = Math.max(out.max[q]!, f1);
      f0[q] = f1;
      d0[q] = d1;
    }
    w = new Float64Array(next);
  }
}

/**
 * Runs a switching system and measures every cycle. Averages and RMS values are exact (the
 * engine's exact integrals of each signal and of its square, read at each cycle boundary);
 * minimum and maximum are found on the exact segment solutions.
 */
export function measureCycles(sys: SwitchingSystem, options: CycleMetricsOptions): CycleReport {
  const o = options;
  if (!(Number.isFinite(o?.stopS) && o.stopS > 0)) throw new RangeError(`stopS must be a time > 0 s, got ${String(o?.stopS)}`);
  if (!Array.isArray(o.signals) || o.signals.length === 0) throw new RangeError('signals must list at least one signal name');
  const bnd = o.boundaries ?? { kind: 'clock' };
  const periodS = bnd.kind === 'clock' ? bnd.periodS ?? sys.timeBaseS : 0;
  const phaseS = bnd.kind === 'clock' ? bnd.phaseS ?? 0 : 0;
  if (bnd.kind === 'clock') {
    if (!(periodS > 0 && Number.isFinite(periodS))) throw new RangeError(`boundaries.periodS must be a time > 0 s, got ${String(periodS)}`);
    if (!(phaseS >= 0 && phaseS < periodS)) throw new RangeError(`boundaries.phaseS must be in [0, periodS), got ${String(phaseS)}`);
  }
  const frac = o.boundaryFraction ?? 0.01;
  if (!(frac > 0 && frac < 1)) throw new RangeError(`boundaryFraction must be in (0, 1), got ${String(frac)}`);
  const stol = o.steadyTolerance ?? 1e-4;
  if (!(stol > 0)) throw new RangeError(`steadyTolerance must be > 0, got ${String(stol)}`);
  const model = modelOf(sys);
  const gateName = o.gate ?? (bnd.kind === 'gate-on' ? bnd.gate : model.circuit.gates[0]);
  if (gateName === undefined) throw new RangeError('gate: the circuit has no gate; name one with options.gate');
  if (!model.circuit.gates.includes(gateName)) throw new RangeError(`gate: unknown gate "${gateName}"; gates: ${model.circuit.gates.join(', ')}`);
  const sigs = [...o.signals];
  const iLIndex = o.inductorCurrent === undefined ? -1 : sigs.indexOf(o.inductorCurrent);
  if (o.inductorCurrent !== undefined && iLIndex < 0) sigs.push(o.inductorCurrent);
  const iq = o.inductorCurrent === undefined ? -1 : sigs.indexOf(o.inductorCurrent);
  for (const s of sigs) {
    try {
      model.resolve(s);
    } catch (err) {
      throw new RangeError(`signals: ${(err as Error).message}`);
    }
  }
  const ns = sigs.length;
  const rowCache = new Map<number, { rows: Float64Array[]; drows: Float64Array[] }>();
  const rowsOf = (key: number): { rows: Float64Array[]; drows: Float64Array[] } => {
    let r = rowCache.get(key);
    if (r === undefined) {
      const t = model.topology(key);
      const rows = sigs.map((s) => t.signalRow(s));
      const drows = rows.map((row) => {
        const d = new Float64Array(t.n);
        for (let i = 0; i < t.nx; i++) {
          const ri = row[i]!;
          if (ri === 0) continue;
          for (let j = 0; j < t.n; j++) d[j]! += ri * t.m[i * t.n + j]!;
        }
        return d;
      });
      r = { rows, drows };
      rowCache.set(key, r);
    }
    return r;
  };

  const cycles: CycleMetrics[] = [];
  let start = 0;
  const tc = new TimingController(sys.createController());
  let boundaryHit = false;
  let gateIdx = -1;
  // boundary k sits at phaseS + k periodS (k >= 1 when phaseS = 0), scheduled drift-free
  const tb = sys.timeBaseS;
  let boundaryCount = phaseS > 0 ? 0 : 1;
  const schedule = (ctx: ControlContext): void => {
    if (periodS === tb) ctx.at(TRACER_TAG, boundaryCount, phaseS);
    else {
      const t = phaseS + boundaryCount * periodS;
      const c = Math.floor(t / tb);
      ctx.at(TRACER_TAG, c, Math.max(0, t - c * tb));
    }
  };
  tc.onStart = (ctx) => {
    gateIdx = ctx.gate(gateName);
    if (bnd.kind === 'clock') schedule(ctx);
  };
  tc.onOwnTimer = (ctx) => {
    boundaryHit = true;
    boundaryCount++;
    schedule(ctx);
  };
  // gate bookkeeping for the open cycle
  let gateOn = false;
  let lastEdge = 0;
  let onTime = 0;
  let turnOns = 0;
  let firstOnInCycle: number | null = null;
  let prevOn: number | null = null;
  let freqOfCycle: number | null = null;
  let pendingOn: number | null = null;
  const turnOn = (timeS: number): void => {
    if (firstOnInCycle === null) {
      firstOnInCycle = timeS;
      if (prevOn !== null && timeS > prevOn) freqOfCycle = 1 / (timeS - prevOn);
    }
    prevOn = timeS;
    turnOns++;
    gateOn = true;
    lastEdge = timeS;
  };
  tc.gateEdge = (g, on, timeS) => {
    if (g !== gateIdx) return;
    if (on) {
      // in gate-on mode a turn-on after the start closes the cycle and opens the next one
      if (bnd.kind === 'gate-on' && timeS > start) {
        boundaryHit = true;
        pendingOn = timeS;
      } else turnOn(timeS);
    } else {
      if (gateOn) onTime += timeS - lastEdge;
      gateOn = false;
      lastEdge = timeS;
    }
  };
  // per-cycle extrema and time at zero current
  const stat: SegStat = { min: new Array<number>(ns).fill(Infinity), max: new Array<number>(ns).fill(-Infinity) };
  let zeroTime = 0;
  const trace: TraceListener = {
    segment(key, h, w0) {
      if (h <= 0) return;
      const { rows, drows } = rowsOf(key);
      if (iq >= 0) {
        const seg: SegStat = { min: new Array<number>(ns).fill(Infinity), max: new Array<number>(ns).fill(-Infinity) };
        segmentExtrema(model, key, h, w0, rows, drows, seg);
        for (let q = 0; q < ns; q++) {
          stat.min[q] = Math.min(stat.min[q]!, seg.min[q]!);
          stat.max[q] = Math.max(stat.max[q]!, seg.max[q]!);
        }
        const t = model.topology(key);
        const held = model.circuit.stateNames.indexOf(o.inductorCurrent!);
        if ((held >= 0 && t.heldInductors.includes(held)) || (seg.max[iq] === 0 && seg.min[iq] === 0)) zeroTime += h;
      } else segmentExtrema(model, key, h, w0, rows, drows, stat);
    },
  };
  const integrals = sigs.flatMap((s, q) => [
    { name: `a${q}`, of: s },
    { name: `q${q}`, of: s, times: s },
  ]);
  const sim = new Simulation(model, {
    stopS: o.stopS, timeBaseS: sys.timeBaseS, controller: tc, integrals, trace,
    ...(o.initialState !== undefined ? { initialState: o.initialState } : {}),
  });
  let prevInts = new Float64Array(2 * ns);
  const close = (endS: number, ints: Readonly<Record<string, number>>): void => {
    const dur = endS - start;
    if (!(dur > 0)) return;
    if (gateOn) onTime += endS - lastEdge;
    lastEdge = endS;
    const signals: Record<string, SignalCycleMetrics> = {};
    const cur = new Float64Array(2 * ns);
    for (let q = 0; q < ns; q++) {
      cur[2 * q] = ints[`a${q}`]!;
      cur[2 * q + 1] = ints[`q${q}`]!;
      const avg = (cur[2 * q]! - prevInts[2 * q]!) / dur;
      const msq = (cur[2 * q + 1]! - prevInts[2 * q + 1]!) / dur;
      const mn = stat.min[q]!, mx = stat.max[q]!;
      signals[sigs[q]!] = { average: avg, min: mn, max: mx, ripple: mx - mn, rms: Math.sqrt(Math.max(0, msq)) };
    }
    let mode: ConductionMode | null = null;
    if (iq >= 0) {
      const mn = stat.min[iq]!, mx = stat.max[iq]!;
      const scale = Math.max(Math.abs(mn), Math.abs(mx));
      const tol = 1e-9 + 1e-9 * scale;
      if (turnOns === 0) mode = 'skipped';
      else if (mn < -tol && mx > tol) mode = 'ccm-negative';
      else if (zeroTime > frac * dur) mode = 'dcm';
      else if (Math.abs(mn) <= frac * (mx - mn) + tol) mode = 'boundary';
      else mode = 'ccm';
    }
    cycles.push({
      index: cycles.length, startS: start, endS, durationS: dur, signals, duty: onTime / dur, turnOns,
      switchingFrequencyHz: turnOns > 0 ? freqOfCycle : null, mode,
    });
    prevInts = cur;
    start = endS;
    onTime = 0;
    turnOns = 0;
    firstOnInCycle = null;
    freqOfCycle = null;
    zeroTime = 0;
    stat.min.fill(Infinity);
    stat.max.fill(-Infinity);
  };
  while (sim.status === 'running') {
    sim.step();
    if (boundaryHit) {
      boundaryHit = false;
      close(sim.timeS, sim.result().integrals);
      if (pendingOn !== null) turnOn(pendingOn);
      pendingOn = null;
    }
  }
  const run = sim.result();
  if (run.status === 'failed') throw new Error(`measureCycles: the run failed: ${run.message}`);
  let lo: number | null = null, hi: number | null = null;
  for (const c of cycles) {
    const f = c.switchingFrequencyHz;
    if (f === null) continue;
    lo = lo === null ? f : Math.min(lo, f);
    hi = hi === null ? f : Math.max(hi, f);
  }
  return { cycles, lowestFrequencyHz: lo, highestFrequencyHz: hi, audible: lo !== null && lo < AUDIO_BAND_HZ, steadyStateCycle: steadyCycle(cycles, sigs, stol), run };
}

function steadyCycle(cycles: readonly CycleMetrics[], sigs: readonly string[], tol: number): number | null {
  if (cycles.length < 2) return null;
  const changed = (a: CycleMetrics, b: CycleMetrics): boolean => {
    for (const s of sigs) {
      const p = a.signals[s]!, q = b.signals[s]!;
      const scale = Math.max(Math.abs(q.average), q.ripple, Math.abs(q.max), Math.abs(q.min), 1e-12);
      if (Math.abs(p.average - q.average) > tol * scale || Math.abs(p.min - q.min) > tol * scale || Math.abs(p.max - q.max) > tol * scale) return true;
    }
    return false;
  };
  let k = cycles.length - 1;
  if (changed(cycles[k - 1]!, cycles[k]!)) return null;
  while (k - 1 >= 1 && !changed(cycles[k - 2]!, cycles[k - 1]!)) k--;
  return k - 1;
}

/** Figures of a step response. */
export interface StepFigures {
  /** Value just before the step. */
  readonly initial: number;
  /** Value the response settles to. */
  readonly final: number;
  /** Largest excursion above the final value after the step (>= 0), in the signal's unit. */
  readonly overshoot: number;
  /** Largest excursion below the final value after the step (>= 0). */
  readonly undershoot: number;
  /** Time from the step until the response stays within the band, seconds; null when it never does. */
  readonly settlingTimeS: number | null;
  /** Half-width of the settling band, in the signal's unit. */
  readonly band: number;
}

/**
 * Overshoot, undershoot and settling time of a sampled response (for instance the per-cycle
 * averages of the output voltage) to a step at `stepS`.
 */
export function stepFigures(
  timesS: readonly number[],
  values: readonly number[],
  options: {
    readonly stepS: number;
    /** Final value (default: the last sample). */
    readonly final?: number;
    /** Band half-width as a fraction of |final| (default 0.02, common practice) ... */
    readonly bandFraction?: number;
    /** ... or in the signal's unit. */
    readonly band?: number;
  },
): StepFigures {
  if (timesS.length !== values.length || timesS.length < 2) throw new RangeError('timesS and values must have the same length >= 2');
  if (!values.every(Number.isFinite)) throw new RangeError('values must be finite numbers');
  const { stepS } = options;
  const iStep = timesS.findIndex((t) => t > stepS);
  if (iStep <= 0) throw new RangeError(`stepS must lie inside the samples (${timesS[0]} .. ${timesS[timesS.length - 1]} s), got ${String(stepS)}`);
  const final = options.final ?? values[values.length - 1]!;
  const band = options.band ?? (options.bandFraction ?? 0.02) * Math.abs(final);
  if (!(band > 0)) throw new RangeError(`band must be > 0, got ${String(band)}`);
  let over = 0, under = 0, lastOut = -1;
  for (let i = iStep; i < values.length; i++) {
    const d = values[i]! - final;
    over = Math.max(over, d);
    under = Math.max(under, -d);
    if (Math.abs(d) > band) lastOut = i;
  }
  const settled = lastOut < values.length - 1;
  const settlingTimeS = !settled ? null : lastOut < 0 ? 0 : timesS[lastOut + 1]! - stepS;
  return { initial: values[iStep - 1]!, final, overshoot: over, undershoot: under, settlingTimeS, band };
}
