import { CircuitModel, SampleKind, Simulation, type Controller, type RunResult } from '@edgewise/engine';
import { closeLoop, type ControlLaw, type Stage } from '../../src/index.ts';

/** One recorded sample. */
export interface Sample {
  readonly t: number;
  readonly kind: SampleKind;
  readonly key: number;
  readonly v: Float64Array;
}

export interface StageRun {
  readonly result: RunResult;
  /** Exact averages of the `average` signals over the last `averageCycles` cycles. */
  readonly avg: Record<string, number>;
  /** Samples (events and grid) recorded from `recordFromS`. */
  readonly samples: Sample[];
  /** Column index of a recorded signal. */
  col(name: string): number;
  readonly controller: Controller;
}

/**
 * Runs a stage with a control law for `cycles` switching periods. Averages are exact
 * (engine integrals between two clock edges); samples are taken from `recordFromS`.
 */
export function runStage(
  stage: Stage,
  law: ControlLaw,
  o: {
    cycles: number;
    averageCycles?: number;
    average?: readonly string[];
    /** Products a*b averaged exactly; reported under "a*b". */
    averageProducts?: readonly (readonly [string, string])[];
    record?: readonly string[];
    recordFromS?: number;
    gridS?: number;
    initialState?: Readonly<Record<string, number>>;
    controller?: Controller;
    model?: CircuitModel;
  },
): StageRun {
  const closed = closeLoop(stage, law);
  const T = closed.timeBaseS;
  const avgNames = o.average ?? [];
  const n = o.averageCycles ?? 1;
  const record = o.record ?? [];
  const samples: Sample[] = [];
  const controller = o.controller ?? closed.createController();
  const model = o.model ?? new CircuitModel(closed.circuit);
  const sim = new Simulation(model, {
    stopS: o.cycles * T,
    timeBaseS: T,
    controller,
    integrals: [
      ...avgNames.map((s, i) => ({ name: `a${i}`, of: s })),
      ...(o.averageProducts ?? []).map(([a, b], i) => ({ name: `p${i}`, of: a, times: b })),
    ],
    ...(record.length > 0
      ? {
          record,
          recordFromS: o.recordFromS ?? 0,
          sink: { sample: (t: number, v: Float64Array, key: number, kind: SampleKind) => samples.push({ t, kind, key, v: new Float64Array(v) }) },
        }
      : {}),
    ...(o.gridS !== undefined ? { gridS: o.gridS } : {}),
    ...(o.initialState !== undefined ? { initialState: o.initialState } : {}),
  });
  const tA = (o.cycles - n) * T;
  while (sim.status === 'running' && sim.timeS < tA - 1e-6 * T) sim.step();
  const before = sim.result().integrals;
  const result = sim.run();
  const avg: Record<string, number> = {};
  avgNames.forEach((s, i) => {
    avg[s] = (result.integrals[`a${i}`]! - before[`a${i}`]!) / (n * T);
  });
  (o.averageProducts ?? []).forEach(([a, b], i) => {
    avg[`${a}*${b}`] = (result.integrals[`p${i}`]! - before[`p${i}`]!) / (n * T);
  });
  return { result, avg, samples, col: (name) => record.indexOf(name), controller };
}

/** Values of a recorded signal at the clock edges (samples just before each edge) from the samples. */
export function atClockEdges(run: StageRun, name: string, periodS: number): { cycle: number; value: number }[] {
  const c = run.col(name);
  const out: { cycle: number; value: number }[] = [];
  for (const s of run.samples) {
    if (s.kind !== SampleKind.Before) continue;
    const k = Math.round(s.t / periodS);
    if (Math.abs(s.t - k * periodS) > 1e-9 * periodS) continue;
    if (out.length > 0 && out[out.length - 1]!.cycle === k) continue;
    out.push({ cycle: k, value: s.v[c]! });
  }
  return out;
}

/** Maximum and minimum of a recorded signal over samples with t in [t0, t1]. */
export function extremes(run: StageRun, name: string, t0: number, t1: number): { max: number; min: number } {
  const c = run.col(name);
  let max = -Infinity, min = Infinity;
  for (const s of run.samples) {
    if (s.t < t0 || s.t > t1) continue;
    max = Math.max(max, s.v[c]!);
    min = Math.min(min, s.v[c]!);
  }
  return { max, min };
}

/** Solves A x = b for a small dense system (Gaussian elimination with partial pivoting). */
function solve(a: number[][], b: number[]): number[] {
  const n = b.length;
  const m = a.map((r, i) => [...r, b[i]!]);
  for (let k = 0; k < n; k++) {
    let p = k;
    for (let i = k + 1; i < n; i++) if (Math.abs(m[i]![k]!) > Math.abs(m[p]![k]!)) p = i;
    [m[k], m[p]] = [m[p]!, m[k]!];
    for (let i = k + 1; i < n; i++) {
      const f = m[i]![k]! / m[k]![k]!;
      for (let j = k; j <= n; j++) m[i]![j]! -= f * m[k]![j]!;
    }
  }
  const x = new Array<number>(n).fill(0);
  for (let i = n - 1; i >= 0; i--) {
    let s = m[i]![n]!;
    for (let j = i + 1; j < n; j++) s -= m[i]![j]! * x[j]!;
    x[i] = s / m[i]![i]!;
  }
  return x;
}

/**
 * Periodic steady state of an open-loop stage (all states are circuit states): Newton on the
 * one-cycle map x -> F(x) with a finite-difference Jacobian (exact for the affine CCM map).
 * Test support only: an independent fixed point for starting runs at steady state.
 */
export function periodicState(stage: Stage, law: ControlLaw, guess: Readonly<Record<string, number>>): Record<string, number> {
  const closed = closeLoop(stage, law);
  const model = new CircuitModel(closed.circuit);
  const names = model.circuit.stateNames;
  const T = closed.timeBaseS;
  const F = (x: number[]): number[] => {
    const init: Record<string, number> = {};
    names.forEach((n, i) => (init[n] = x[i]!));
    const r = new Simulation(model, { stopS: T, timeBaseS: T, controller: closed.createController(), initialState: init }).run();
    if (r.status !== 'finished') throw new Error(r.message);
    return names.map((_, i) => r.state[i]!);
  };
  let x = names.map((n) => guess[n] ?? guess[n.replace(/\.(current|charge)$/, '')] ?? 0);
  for (let it = 0; it < 30; it++) {
    const fx = F(x);
    const res = fx.map((v, i) => v - x[i]!);
    const scale = Math.max(1, ...x.map(Math.abs));
    if (Math.max(...res.map(Math.abs)) < 1e-13 * scale) break;
    const J = names.map(() => new Array<number>(names.length).fill(0));
    for (let j = 0; j < names.length; j++) {
      const h = 1e-6 * Math.max(1, Math.abs(x[j]!));
      const xp = [...x];
      xp[j]! += h;
      const fp = F(xp);
      for (let i = 0; i < names.length; i++) J[i]![j] = (fp[i]! - fx[i]!) / h - (i === j ? 1 : 0);
    }
    const dx = solve(J, res.map((v) => -v));
    x = x.map((v, i) => v + dx[i]!);
  }
  const out: Record<string, number> = {};
  names.forEach((n, i) => (out[n] = x[i]!));
  return out;
}
