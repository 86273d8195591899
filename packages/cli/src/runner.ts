/**
 * Runs a plan: streams samples to an optional CSV writer, collects summary metrics over the
 * window (exact means and RMS from the engine's integrals, extremes from the samples), per-cycle
 * statistics and thinned waveforms for the report. Memory stays flat for long runs.
 * @module
 */
import { SampleKind, Simulation, type IntegralSpec, type RunCounters, type SampleSink } from '@edgewise/engine';
import type { CsvWriter } from './csv.ts';
import { withMark } from './drive.ts';
import type { Plan } from './scenario/build.ts';
import { conductionTerms, makeAccountant, switchingWatts, type LossPart, type SwitchingLossJson } from './analyses/losses.ts';

/** Metrics of one signal over the window. */
export interface SignalMetrics {
  unit: string;
  mean: number;
  rms: number;
  min: number;
  max: number;
  peakToPeak: number;
  /** Value at the stop time, units of the signal. */
  final: number;
}

/** Average power over the window, watts, and energy, joules. */
export interface PowerMetrics {
  mean: number;
  energy: number;
}

/** Summary of one run (the summary JSON). */
export interface RunSummary {
  scenario: string;
  status: 'finished' | 'stopped' | 'failed';
  message: string;
  error?: { code: string; elements: readonly string[]; timeS: number };
  stopS: number;
  window: { fromS: number; toS: number };
  periodS?: number;
  cycles?: number;
  averaging: 'exact' | 'samples';
  signals: Record<string, SignalMetrics>;
  powers?: Record<string, PowerMetrics>;
  efficiency?: number;
  modes?: { ccmCycles: number; dcmCycles: number; lastCycle: 'CCM' | 'DCM' };
  /** Loss breakdown over the window: conduction per element part, switching per device when the scenario has switching-loss data. */
  losses?: LossSummary;
  /**
   * For stages with a voltage loop: the exact mean output over the last switching period
   * against the target (reference / feedback gain); `regulated` is false when the error exceeds
   * the tolerance, so a loop that fails to regulate is reported, not hidden.
   */
  regulation?: RegulationSummary;
  /** Turn-ons of the main switch in the window and the mean switching frequency between the first and last. */
  switching?: { turnOns: number; frequencyHz: number };
  counters: RunCounters;
  [extra: string]: unknown;
}

/** Regulation of a closed voltage loop at the end of the run. */
export interface RegulationSummary {
  signal: string;
  targetVolts: number;
  lastPeriodMeanVolts: number;
  errorVolts: number;
  /** |error| allowed: 1 % of the target (common practice for a regulation band), plus half the output's peak-to-peak over the window for constant on-time and hysteretic laws (they regulate a valley or a band). */
  toleranceVolts: number;
  regulated: boolean;
}

/** Target output of a stage plant's voltage loop (reference / feedback gain), or undefined. */
function regulationTarget(plan: Plan): { signal: string; volts: number; rippleBased: boolean } | undefined {
  const plant = plan.scenario.plant as unknown as { kind: string; converter?: string; control?: Record<string, unknown> };
  if (plant.kind !== 'stage' || plan.stage === undefined || plant.control === undefined) return undefined;
  const c = plant.control;
  const loop = c.kind === 'peak-current' ? (c.command as Record<string, unknown> | undefined) : c;
  if (loop === undefined || !(c.kind === 'voltage-mode' || c.kind === 'constant-on-time' || c.kind === 'hysteretic' || (c.kind === 'peak-current' && loop.kind === 'voltage-loop'))) return undefined;
  let ref = loop.referenceVolts;
  const schedule = loop.referenceSchedule as { atS: unknown; volts: unknown }[] | undefined;
  for (const e of schedule ?? []) if (typeof e.atS === 'number' && e.atS <= plan.stopS && typeof e.volts === 'number') ref = e.volts;
  const gain = typeof loop.feedbackGain === 'number' ? loop.feedbackGain : plant.converter === 'buck-boost' ? -1 : 1;
  if (typeof ref !== 'number' || !Number.isFinite(ref) || gain === 0) return undefined;
  return { signal: plan.stage.signals.outputVoltage, volts: ref / gain, rippleBased: c.kind === 'constant-on-time' || c.kind === 'hysteretic' };
}

/** Loss breakdown over the window, watts. */
export interface LossSummary {
  conduction: { element: string; part: LossPart; watts: number }[];
  conductionW: number;
  switching?: SwitchingLossJson[];
  switchingW?: number;
  totalW: number;
  /** Output power over (input power + accounted switching losses), when the scenario defines an efficiency. */
  efficiencyWithSwitching?: number;
}

/** Per-cycle statistics (one entry per period in the window). */
export interface CycleSeries {
  startS: number[];
  mode: ('CCM' | 'DCM')[];
  mean: number[][];
  min: number[][];
  max: number[][];
  /** Fraction of each cycle the main switch conducted (from the topology keys; empty without a main gate). */
  duty: number[];
  /** Turn-ons of the main switch in each cycle. */
  turnOns: number[];
  /** Length of each cycle, seconds. */
  spanS: number[];
}

/** Thinned waveforms kept for plots. */
export interface Waveforms {
  t: number[];
  values: number[][];
}

/** Options of {@link runPlan}. */
export interface RunPlanOptions {
  readonly csv?: CsvWriter;
  /** Called now and then with the fraction done. */
  readonly progress?: (fraction: number) => void;
  /** Keep waveforms and per-cycle data for a report (default false). */
  readonly keepWaveforms?: boolean;
  /** Overrides of initial state (e.g. a periodic steady state). */
  readonly initialState?: Float64Array;
}

export interface RunOutcome {
  summary: RunSummary;
  waveforms?: Waveforms;
  cycles?: CycleSeries;
  finalState: Float64Array;
}

const MAX_WAVE_POINTS = 60_000;
const MAX_CYCLES_KEPT = 200_000;

/** Runs a plan to its stop time and summarises it. A failed run is an outcome, not a throw. */
export function runPlan(plan: Plan, options: RunPlanOptions = {}): RunOutcome {
  const nSig = plan.record.length;
  const exact = plan.exactAverages;
  const integrals: IntegralSpec[] = [];
  if (exact) {
    plan.record.forEach((s, i) => {
      integrals.push({ name: `m${i}`, of: s }, { name: `q${i}`, of: s, times: s });
    });
  }
  plan.powers.forEach((p, i) => integrals.push({ name: `p${i}`, of: p.voltage, times: p.current }));
  const lossTerms = conductionTerms(plan.model, plan.lossExclude);
  for (const t of lossTerms) integrals.push(t.integral);
  const accountant = plan.scenario.switchingLosses !== undefined ? makeAccountant(plan.model, plan.scenario.switchingLosses, {
        fromS: plan.fromS,
        // a clock edge exactly at the stop time starts the next period: not this window's
        toS: plan.stopS - 1e-9 * (plan.periodS ?? plan.stopS),
      }, plan.name) : undefined;

  // Window statistics from the samples.
  const min = new Float64Array(nSig).fill(Infinity);
  const max = new Float64Array(nSig).fill(-Infinity);
  const last = new Float64Array(nSig);
  const sum = new Float64Array(nSig);
  const sumSq = new Float64Array(nSig);
  let prevT = Number.NaN;
  const prev = new Float64Array(nSig);
  let any = false;

  // Per-cycle statistics.
  const T = plan.periodS;
  const trackCycles = T !== undefined;
  const held = new Map<number, boolean>();
  const isHeld = (key: number): boolean => {
    let h = held.get(key);
    if (h === undefined) {
      try {
        h = plan.model.topology(key).heldInductors.length > 0;
      } catch {
        h = false;
      }
      held.set(key, h);
    }
    return h;
  };
  let cycleIndex = -1;
  let cycleDcm = false;
  let ccm = 0;
  let dcm = 0;
  const keep = options.keepWaveforms === true;
  const cyc: CycleSeries | undefined = keep && trackCycles ? { startS: [], mode: [], mean: [], min: [], max: [], duty: [], turnOns: [], spanS: [] } : undefined;
  let cSum = new Float64Array(nSig);
  let cMin = new Float64Array(nSig).fill(Infinity);
  let cMax = new Float64Array(nSig).fill(-Infinity);
  let cStart = 0;
  let cOn = 0;
  let cTurnOns = 0;
  const closeCycle = (endS: number): void => {
    if (cycleIndex < 0) return;
    if (cycleDcm) dcm++;
    else ccm++;
    if (cyc !== undefined && cyc.startS.length < MAX_CYCLES_KEPT) {
      const span = endS - cStart;
      cyc.startS.push(cStart);
      cyc.mode.push(cycleDcm ? 'DCM' : 'CCM');
      cyc.mean.push(Array.from(cSum, (v) => (span > 0 ? v / span : Number.NaN)));
      cyc.min.push(Array.from(cMin));
      cyc.max.push(Array.from(cMax));
      cyc.spanS.push(span);
      if (mainMask !== 0) {
        cyc.duty.push(span > 0 ? cOn / span : Number.NaN);
        cyc.turnOns.push(cTurnOns);
      }
    }
  };

  // Thinned waveforms: when full, keep every other point and double the stride.
  const wave: Waveforms | undefined = keep ? { t: [], values: Array.from({ length: nSig }, () => []) } : undefined;
  let stride = 1;
  let counter = 0;

  // Turn-ons of the main switch, from the device bits of the topology keys.
  let mainMask = 0;
  if (plan.mainGate !== undefined) {
    const c = plan.model.circuit;
    const g = c.gates.indexOf(plan.mainGate);
    c.devices.forEach((d, i) => {
      if (d.kind === 'channel' && d.gate === g) mainMask |= 1 << i;
    });
  }
  let lastKey = -1;
  let turnOns = 0;
  let firstOn = Number.NaN;
  let lastOn = Number.NaN;

  const row = new Float64Array(nSig + 1);
  const csv = options.csv;
  const progress = options.progress;
  let nextProgress = 0;
  const sink: SampleSink = {
    sample(timeS, values, key, kind) {
      if (csv !== undefined) {
        row[0] = timeS;
        for (let i = 0; i < nSig; i++) row[i + 1] = values[i]!;
        csv.row(row, [String(key)]);
      }
      // The piece from the previous sample to this one belongs to the cycle in force before
      // this sample: accumulate it (and the main switch's on-time over it) first.
      const dt = any ? timeS - prevT : 0;
      if (dt > 0) {
        for (let i = 0; i < nSig; i++) {
          const a = prev[i]!, v = values[i]!;
          sum[i]! += 0.5 * dt * (a + v);
          sumSq[i]! += (dt / 3) * (a * a + a * v + v * v); // exact for a linear piece
          cSum[i]! += 0.5 * dt * (a + v);
        }
        if (mainMask !== 0 && lastKey >= 0 && (lastKey & mainMask) !== 0) cOn += dt;
      }
      if (trackCycles) {
        // Samples at a clock edge belong to the cycle that starts there (the "after" side); the
        // index only moves forward, so a grid point that rounds just past an edge cannot
        // reopen the cycle before it.
        const k = Math.floor((timeS - plan.fromS) / T + (kind === SampleKind.Before ? -1e-9 : 1e-9));
        if (k > cycleIndex && timeS < plan.stopS - T * 1e-9) {
          closeCycle(timeS);
          cycleIndex = k;
          cycleDcm = false;
          cStart = timeS;
          cOn = 0;
          cTurnOns = 0;
          cSum = new Float64Array(nSig);
          cMin = new Float64Array(nSig).fill(Infinity);
          cMax = new Float64Array(nSig).fill(-Infinity);
        }
        if (kind !== SampleKind.Before && isHeld(key)) cycleDcm = true;
      }
      if (mainMask !== 0) {
        if (lastKey >= 0 && (key & mainMask) !== 0 && (lastKey & mainMask) === 0) {
          cTurnOns++;
          turnOns++;
          if (turnOns === 1) firstOn = timeS;
          lastOn = timeS;
        }
        lastKey = key;
      }
      for (let i = 0; i < nSig; i++) {
        const v = values[i]!;
        if (v < min[i]!) min[i] = v;
        if (v > max[i]!) max[i] = v;
        if (v < cMin[i]!) cMin[i] = v;
        if (v > cMax[i]!) cMax[i] = v;
        prev[i] = v;
        last[i] = v;
      }
      prevT = timeS;
      any = true;
      if (wave !== undefined && counter++ % stride === 0) {
        wave.t.push(timeS);
        for (let i = 0; i < nSig; i++) wave.values[i]!.push(values[i]!);
        if (wave.t.length >= MAX_WAVE_POINTS) {
          wave.t = wave.t.filter((_, j) => j % 2 === 0);
          wave.values = wave.values.map((v) => v.filter((_, j) => j % 2 === 0));
          stride *= 2;
        }
      }
      if (progress !== undefined && timeS >= nextProgress) {
        progress(timeS / plan.stopS);
        nextProgress = timeS + plan.stopS / 200;
      }
    },
  };

  let atMark: Readonly<Record<string, number>> | undefined;
  let marked = false;
  let controller = withMark(plan.createController(), plan.fromS, () => {
    marked = true;
  });
  // the exact mean output over the last period, for the regulation check
  const target = regulationTarget(plan);
  const lastS = T !== undefined ? plan.stopS - T : -1;
  let lastMarked = false;
  let atLast: number | undefined;
  if (target !== undefined && T !== undefined && lastS >= 0) {
    integrals.push({ name: 'regulation', of: target.signal });
    controller = withMark(controller, lastS, () => {
      lastMarked = true;
    }, 2 ** 50 + 9);
  }
  const sim = new Simulation(plan.model, {
    stopS: plan.stopS,
    timeBaseS: plan.timeBaseS,
    controller,
    record: plan.record,
    sink,
    ...(plan.gridS !== undefined ? { gridS: plan.gridS } : {}),
    recordFromS: plan.fromS,
    recordEvents: plan.recordEvents,
    integrals,
    ...(accountant !== undefined ? { trace: accountant } : {}),
    ...(options.initialState !== undefined
      ? { initialState: options.initialState }
      : plan.initial !== undefined ? { initialState: plan.initial } : {}),
  });
  if (marked) atMark = sim.result().integrals;
  if (lastMarked) atLast = sim.result().integrals.regulation;
  while (sim.status === 'running') {
    sim.step();
    if (marked && atMark === undefined) atMark = sim.result().integrals;
    if (lastMarked && atLast === undefined) atLast = sim.result().integrals.regulation;
  }
  const result = sim.result();
  if (trackCycles) closeCycle(result.timeS);
  const span = result.timeS - plan.fromS;
  const ints = result.integrals;
  const base = atMark ?? {};
  const windowIntegral = (name: string): number => (ints[name] ?? 0) - (base[name] ?? 0);

  const signals: Record<string, SignalMetrics> = {};
  plan.record.forEach((s, i) => {
    const mean = span > 0 ? (exact ? windowIntegral(`m${i}`) : sum[i]!) / span : last[i]!;
    const ms = span > 0 ? (exact ? windowIntegral(`q${i}`) : sumSq[i]!) / span : last[i]! ** 2;
    signals[s] = {
      unit: plan.units[i]!,
      mean,
      rms: Math.sqrt(Math.max(0, ms)),
      min: min[i]!,
      max: max[i]!,
      peakToPeak: max[i]! - min[i]!,
      final: last[i]!,
    };
  });
  const summary: RunSummary = {
    scenario: plan.name,
    status: result.status,
    message: result.message,
    ...(result.error !== undefined ? { error: { code: result.error.code, elements: result.error.elements, timeS: result.error.timeS } } : {}),
    stopS: plan.stopS,
    window: { fromS: plan.fromS, toS: result.timeS },
    ...(T !== undefined ? { periodS: T, cycles: Math.round(span / T) } : {}),
    averaging: exact ? 'exact' : 'samples',
    signals,
    counters: result.counters,
  };
  if (plan.powers.length > 0) {
    const powers: Record<string, PowerMetrics> = {};
    plan.powers.forEach((p, i) => {
      const e = p.gain * windowIntegral(`p${i}`);
      powers[p.name] = { mean: span > 0 ? e / span : 0, energy: e };
    });
    summary.powers = powers;
    if (plan.efficiency !== undefined) {
      const total = (names: readonly string[]): number => names.reduce((a, n) => a + powers[n]!.mean, 0);
      summary.efficiency = total(plan.efficiency.output) / total(plan.efficiency.input);
    }
  }
  if (lossTerms.length > 0 || accountant !== undefined) {
    const conduction = lossTerms.map((t) => ({ element: t.element, part: t.part, watts: span > 0 ? (t.scale * windowIntegral(t.integral.name)) / span : 0 }));
    const conductionW = conduction.reduce((a, x) => a + x.watts, 0);
    const losses: LossSummary = { conduction, conductionW, totalW: conductionW };
    if (accountant !== undefined && span > 0) {
      losses.switching = switchingWatts(accountant.energies(), span);
      losses.switchingW = losses.switching.reduce((a, x) => a + x.totalW, 0);
      losses.totalW = conductionW + losses.switchingW;
      if (plan.efficiency !== undefined && summary.powers !== undefined) {
        const total = (names: readonly string[]): number => names.reduce((a, n) => a + summary.powers![n]!.mean, 0);
        losses.efficiencyWithSwitching = total(plan.efficiency.output) / (total(plan.efficiency.input) + losses.switchingW);
      }
    }
    summary.losses = losses;
  }
  if (target !== undefined && T !== undefined && atLast !== undefined && result.status === 'finished') {
    const mean = ((ints.regulation ?? 0) - atLast) / T;
    const rec = plan.record.indexOf(target.signal);
    // laws that regulate a valley or a band sit off their reference by up to half the ripple
    const ripple = target.rippleBased && rec >= 0 ? max[rec]! - min[rec]! : 0;
    const tol = 0.01 * Math.abs(target.volts) + 0.5 * ripple;
    summary.regulation = {
      signal: target.signal,
      targetVolts: target.volts,
      lastPeriodMeanVolts: mean,
      errorVolts: mean - target.volts,
      toleranceVolts: tol,
      regulated: Math.abs(mean - target.volts) <= tol,
    };
  }
  if (mainMask !== 0) summary.switching = { turnOns, frequencyHz: turnOns > 1 ? (turnOns - 1) / (lastOn - firstOn) : 0 };
  if (trackCycles && ccm + dcm > 0) summary.modes = { ccmCycles: ccm, dcmCycles: dcm, lastCycle: cycleDcm ? 'DCM' : 'CCM' };
  return {
    summary,
    ...(wave !== undefined ? { waveforms: wave } : {}),
    ...(cyc !== undefined ? { cycles: cyc } : {}),
    finalState: result.state,
  };
}
