/**
 * Averaged models derived from the same circuit the switching analyses run, and transfer
 * functions evaluated at complex frequencies.
 *
 * CCM state-space averaging (Middlebrook and Cuk, 1976, "A general unified approach to
 * modelling switching-converter power stages"): with the two CCM topologies dx/dt = A1 x + B1 u
 * (switch on, for d) and A2 x + B2 u (off, for 1 - d), the averaged model is A = D A1 + D' A2,
 * B = D B1 + D' B2, its DC point X = -A^-1 B U, and the duty perturbation enters through
 * (A1 - A2) X + (B1 - B2) U.
 */
import type { CircuitModel } from '@edgewise/engine';
import { bode, csolve, czeros, solveReal, type Complex } from './linalg.ts';
import { modelOf, type SwitchingSystem } from './trace.ts';

/** A transfer function: its value at a complex frequency s (rad/s). */
export type TransferFunction = (s: Complex) => Complex;

/** A linear model dx/dt = A x + B u, y = C x + D u (row-major, SI units of the states and inputs). */
export interface StateSpace {
  readonly nx: number;
  readonly nu: number;
  readonly ny: number;
  readonly a: Float64Array;
  readonly b: Float64Array;
  readonly c: Float64Array;
  readonly d: Float64Array;
}

/** A user's averaged model: state space (input and output by index) or any function of s. */
export type UserAveragedModel =
  | { readonly kind: 'state-space'; readonly model: StateSpace; readonly input: number; readonly output: number }
  | { readonly kind: 'function'; readonly at: TransferFunction };

/** C (sI - A)^-1 b + e for one input column b (length nx) and output row c. */
export function evaluateStateSpace(a: Float64Array, nx: number, b: ArrayLike<number>, c: ArrayLike<number>, e: number, s: Complex): Complex {
  const M = czeros(nx, nx);
  for (let i = 0; i < nx; i++) {
    for (let j = 0; j < nx; j++) M.re[i * nx + j] = -a[i * nx + j]!;
    M.re[i * nx + i]! += s.re;
    M.im[i * nx + i]! += s.im;
  }
  const rhs = czeros(nx, 1);
  for (let i = 0; i < nx; i++) rhs.re[i] = b[i]!;
  const x = csolve(M, rhs);
  if (x === null) throw new Error(`sI - A is singular at s = ${s.re} + ${s.im}i (a pole of the model)`);
  let re = e, im = 0;
  for (let i = 0; i < nx; i++) {
    re += c[i]! * x.re[i]!;
    im += c[i]! * x.im[i]!;
  }
  return { re, im };
}

/** Transfer function of a user's averaged model. */
export function userTransferFunction(m: UserAveragedModel): TransferFunction {
  if (m.kind === 'function') return m.at;
  const { model, input, output } = m;
  const { nx, nu, ny } = model;
  if (!(Number.isInteger(input) && input >= 0 && input < nu)) throw new RangeError(`input must be an index in [0, ${nu}), got ${String(input)}`);
  if (!(Number.isInteger(output) && output >= 0 && output < ny)) throw new RangeError(`output must be an index in [0, ${ny}), got ${String(output)}`);
  for (const [name, arr, len] of [['a', model.a, nx * nx], ['b', model.b, nx * nu], ['c', model.c, ny * nx], ['d', model.d, ny * nu]] as const) {
    if (arr.length !== len) throw new RangeError(`model.${name} must have ${len} entries, got ${arr.length}`);
    if (!Array.from(arr).every(Number.isFinite)) throw new RangeError(`model.${name} must hold finite numbers`);
  }
  const b = Array.from({ length: nx }, (_, i) => model.b[i * nu + input]!);
  const c = Array.from({ length: nx }, (_, i) => model.c[output * nx + i]!);
  const e = model.d[output * nu + input]!;
  return (s) => evaluateStateSpace(model.a, nx, b, c, e, s);
}

/** One point of a frequency response. */
export interface ResponsePoint {
  readonly frequencyHz: number;
  readonly value: Complex;
  readonly magnitudeDb: number;
  readonly phaseDeg: number;
}

/** Evaluates a transfer function at s = j 2 pi f for each frequency (hertz). */
export function frequencyResponseOf(tf: TransferFunction, frequenciesHz: readonly number[]): ResponsePoint[] {
  return frequenciesHz.map((f) => {
    if (!(f > 0 && Number.isFinite(f))) throw new RangeError(`frequenciesHz must be > 0, got ${String(f)}`);
    const v = tf({ re: 0, im: 2 * Math.PI * f });
    return { frequencyHz: f, value: v, ...bode(v) };
  });
}

/** Topology key with exactly the named devices conducting (switch ids for channels, diode ids, `<switch>.body`). */
export function topologyKeyOf(model: CircuitModel, conducting: readonly string[]): number {
  let key = 0;
  for (const id of conducting) {
    const d = model.circuit.devices.findIndex((x) => x.id === id);
    if (d < 0) throw new RangeError(`unknown device "${id}"; devices: ${model.circuit.devices.map((x) => x.id).join(', ')}`);
    key |= 1 << d;
  }
  return key;
}

/**
 * What every averaged model offers (CCM, DCM reduced and full order), so
 * that the validation report takes any of them (the peak current-mode model of Ridley 1991
 * gives transfer functions only: see current-mode.ts). Signals are engine signal names of the
 * circuit the model was derived from; inputs are the circuit's inputs (u[0] = 1, then the
 * independent sources by id).
 */
export interface AveragedModel {
  readonly kind: 'ccm' | 'dcm-reduced' | 'dcm-full';
  /** States of the averaged model (engine state names). */
  readonly stateNames: readonly string[];
  /** The circuit's inputs: "1" (constant), then the independent sources by id. */
  readonly inputNames: readonly string[];
  /** DC operating point of the states (volts, amperes). */
  readonly dcState: Float64Array;
  /** DC value of a signal at the operating point. */
  dcValue(signal: string): number;
  /**
   * Small-signal model about the operating point: inputs are deviations of the circuit's inputs
   * (all of them, u[0] included with a zero column) at fixed control, the output is `signal`.
   * For the CCM model at a fixed duty this is the large-signal averaged model itself (it is
   * linear in x and u).
   */
  smallSignal(signal: string): StateSpace;
  /** Duty d -> signal (for current mode: control input -> signal). */
  controlToOutput(signal: string): TransferFunction;
  /** Independent source (by id) -> signal: line-to-output, or output impedance with a current source at the output. */
  inputToOutput(source: string, signal: string): TransferFunction;
  /**
   * Peak-to-peak ripple of a signal by the straight-line (small-ripple) approximation
   * (Erickson and Maksimovic 2nd ed., ch. 2), or null when the model has no ripple estimate.
   */
  rippleEstimate(signal: string): number | null;
}

/** Options of {@link ccmAveragedModel}. */
export interface CcmAveragingOptions {
  /** Devices conducting during the on-time (interval d), e.g. ["S"]. */
  readonly on: readonly string[];
  /** Devices conducting during the off-time (interval 1 - d), e.g. ["D"]. */
  readonly off: readonly string[];
  /** Steady-state duty D in (0, 1). */
  readonly duty: number;
  /**
   * States kept in the averaged model (default: every inductor current and capacitor voltage;
   * controller blocks such as ramps are left out because averaging does not apply to them).
   */
  readonly states?: readonly string[];
  /** Switching period, seconds: needed only for {@link AveragedModel.rippleEstimate} (null without it). */
  readonly periodS?: number;
}

/** A CCM averaged model (Middlebrook and Cuk 1976). */
export interface CcmAveragedModel extends AveragedModel {
  readonly kind: 'ccm';
  readonly duty: number;
  readonly stateNames: readonly string[];
  readonly inputNames: readonly string[];
  /** Averaged A (nx x nx) and B (nx x nu), row-major. */
  readonly a: Float64Array;
  readonly b: Float64Array;
  /** DC operating point X = -A^-1 B U of the kept states, with U the circuit's input values. */
  readonly dcState: Float64Array;
  /** DC value of a signal at the operating point (averaged output equation). */
  dcValue(signal: string): number;
  /** Duty d -> signal. */
  controlToOutput(signal: string): TransferFunction;
  /** Independent source (by id) -> signal: line-to-output, or output impedance with a current source at the output. */
  inputToOutput(source: string, signal: string): TransferFunction;
}

/**
 * Builds the CCM state-space averaged model of a circuit from its on and off topologies. The
 * inputs U are the circuit's source values at t = 0 (after u[0] = 1, which carries diode
 * forward voltages).
 */
export function ccmAveragedModel(circuit: SwitchingSystem['circuit'], options: CcmAveragingOptions): CcmAveragedModel {
  const model = modelOf({ circuit, createController: () => ({ start() {}, onEvent() {} }), timeBaseS: 1 });
  const { duty: D } = options;
  if (!(D > 0 && D < 1)) throw new RangeError(`duty must be in (0, 1), got ${String(D)}`);
  const Ts = options.periodS;
  if (Ts !== undefined && !(Ts > 0 && Number.isFinite(Ts))) throw new RangeError(`periodS must be a time > 0 s, got ${String(Ts)}`);
  const c = model.circuit;
  const names = options.states ?? c.stateNames.filter((nm) => {
    const id = nm.slice(0, nm.indexOf('.'));
    const el = c.spec.elements.find((e) => e.id === id);
    return (el?.kind === 'inductor' && nm.endsWith('.current')) || (el?.kind === 'capacitor' && nm.endsWith('.charge'));
  });
  const idx = names.map((nm) => {
    const i = c.stateNames.indexOf(nm);
    if (i < 0) throw new RangeError(`states: unknown state "${nm}"; states: ${c.stateNames.join(', ')}`);
    return i;
  });
  const t1 = model.topology(topologyKeyOf(model, options.on));
  const t2 = model.topology(topologyKeyOf(model, options.off));
  const nxF = c.nx, n = nxF + c.nu, nx = idx.length, nu = c.nu;
  const pick = (t: typeof t1): { a: Float64Array; b: Float64Array } => {
    const a = new Float64Array(nx * nx), b = new Float64Array(nx * nu);
    for (let i = 0; i < nx; i++) {
      for (let j = 0; j < nx; j++) a[i * nx + j] = t.m[idx[i]! * n + idx[j]!]!;
      for (let j = 0; j < nu; j++) b[i * nu + j] = t.m[idx[i]! * n + nxF + j]!;
    }
    return { a, b };
  };
  const m1 = pick(t1), m2 = pick(t2);
  const a = m1.a.map((v, i) => D * v + (1 - D) * m2.a[i]!);
  const b = m1.b.map((v, i) => D * v + (1 - D) * m2.b[i]!);
  const U = c.initialState.slice(nxF);
  const BU = new Float64Array(nx);
  for (let i = 0; i < nx; i++) for (let j = 0; j < nu; j++) BU[i]! += b[i * nu + j]! * U[j]!;
  const X = solveReal(a, BU.map((v) => -v), nx, 1);
  if (X === null) throw new Error('the averaged A is singular: no DC operating point (an undamped integrator among the kept states?)');
  // full w at the operating point (other states zero) for output rows
  const wAt = new Float64Array(n);
  idx.forEach((k, i) => (wAt[k] = X[i]!));
  wAt.set(U, nxF);
  const rows = (sig: string): { r1: Float64Array; r2: Float64Array } => {
    try {
      return { r1: t1.signalRow(sig), r2: t2.signalRow(sig) };
    } catch (err) {
      throw new RangeError(`signal: ${(err as Error).message}`);
    }
  };
  const dot = (r: Float64Array, w: Float64Array): number => r.reduce((s, v, j) => s + v * w[j]!, 0);
  const cOf = (r1: Float64Array, r2: Float64Array): number[] => idx.map((k) => D * r1[k]! + (1 - D) * r2[k]!);
  // state derivative in the on-interval at the operating point: the straight-line ripple slope
  const f1 = new Float64Array(nx);
  for (let i = 0; i < nx; i++) {
    let v = 0;
    for (let j = 0; j < nx; j++) v += m1.a[i * nx + j]! * X[j]!;
    for (let j = 0; j < nu; j++) v += m1.b[i * nu + j]! * U[j]!;
    f1[i] = v;
  }
  return {
    kind: 'ccm',
    duty: D,
    stateNames: names,
    inputNames: c.inputNames,
    a,
    b,
    dcState: X,
    dcValue(sig) {
      const { r1, r2 } = rows(sig);
      return D * dot(r1, wAt) + (1 - D) * dot(r2, wAt);
    },
    controlToOutput(sig) {
      const { r1, r2 } = rows(sig);
      // duty column: (A1 - A2) X + (B1 - B2) U; feedthrough: (C1 - C2) X + (E1 - E2) U
      const bd = new Float64Array(nx);
      for (let i = 0; i < nx; i++) {
        let s = 0;
        for (let j = 0; j < nx; j++) s += (m1.a[i * nx + j]! - m2.a[i * nx + j]!) * X[j]!;
        for (let j = 0; j < nu; j++) s += (m1.b[i * nu + j]! - m2.b[i * nu + j]!) * U[j]!;
        bd[i] = s;
      }
      const e = dot(r1, wAt) - dot(r2, wAt);
      const cr = cOf(r1, r2);
      return (s) => evaluateStateSpace(a, nx, bd, cr, e, s);
    },
    smallSignal(sig) {
      const { r1, r2 } = rows(sig);
      const d = new Float64Array(nu);
      for (let j = 0; j < nu; j++) d[j] = D * r1[nxF + j]! + (1 - D) * r2[nxF + j]!;
      d[0] = 0;
      const bs = b.slice();
      for (let i = 0; i < nx; i++) bs[i * nu] = 0;
      return { nx, nu, ny: 1, a: a.slice(), b: bs, c: Float64Array.from(cOf(r1, r2)), d };
    },
    rippleEstimate(sig) {
      if (Ts === undefined) return null;
      const { r1, r2 } = rows(sig);
      // straight-line ripple: the states run from valley X - f1 D T / 2 to peak X + f1 D T / 2
      // in the on-interval and back in the off-interval; the signal may also jump between the
      // two topologies' output equations
      const half = (D * Ts) / 2;
      const wLo = wAt.slice(), wHi = wAt.slice();
      idx.forEach((k, i) => {
        wLo[k] = X[i]! - f1[i]! * half;
        wHi[k] = X[i]! + f1[i]! * half;
      });
      const v = [dot(r1, wLo), dot(r1, wHi), dot(r2, wHi), dot(r2, wLo)];
      return Math.max(...v) - Math.min(...v);
    },
    inputToOutput(source, sig) {
      const u = c.inputNames.indexOf(source);
      if (u <= 0) throw new RangeError(`source: unknown independent source "${source}"; sources: ${c.inputNames.slice(1).join(', ')}`);
      const { r1, r2 } = rows(sig);
      const col = Array.from({ length: nx }, (_, i) => b[i * nu + u]!);
      const e = D * r1[nxF + u]! + (1 - D) * r2[nxF + u]!;
      const cr = cOf(r1, r2);
      return (s) => evaluateStateSpace(a, nx, col, cr, e, s);
    },
  };
}
