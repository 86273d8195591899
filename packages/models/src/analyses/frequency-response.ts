/**
 * Small-signal frequency response of the switching circuit itself, two ways:
 *
 * 1. Sampled-data linearization at the periodic steady state. A sinusoidal perturbation
 *    eps e^{jwt} of one source is followed through the traced steady-state period in the frame
 *    rotating at w (xi = dx e^{-jwt}), where every segment is linear time-invariant:
 *    dxi/dt = (A - jw) xi + b eps, and the output's Fourier integral dI/dt = c xi + e eps. At
 *    each switching instant the time shift of the instant (from the guard, or inherited by a
 *    timer) moves the state by the saltation term and the output integral by (y- - y+) dtau.
 *    The Floquet-Bloch condition dx(t + T) = e^{jwT} dx(t) makes xi periodic, which closes the
 *    cycle: xi0 = (I - Psi)^-1 psi, and the output's component at w is (Lambda xi0 + lambda)/T.
 *    That is exact (to rounding) at any w for the linearized periodic system; it is the
 *    harmonic-balance view of the sampled-data model of Verghese, Elbuluk and Kassakian (1986,
 *    "A general approach to sampled-data modeling for power electronic circuits").
 * 2. Sine injection: the transient simulation with a sine added to the source, then the exact
 *    Fourier integrals of the output against the injected sine over an integer number of
 *    switching and injection periods after settling.
 */
import { CircuitModel, expm, Simulation, type CircuitSpec, type ElementSpec } from '@edgewise/engine';
import { bode, csolve, czeros, type CMat, type Complex } from './linalg.ts';
import type { ResponsePoint } from './averaging.ts';
import { periodicSteadyState, type SteadyState } from './shooting.ts';
import { derivative, modelOf, type Chain, type SwitchingSystem } from './trace.ts';

/** Complex matrix exponential of G (N x N) times h through the real embedding [[Gr, -Gi], [Gi, Gr]]. */
function cexpm(gr: Float64Array, gi: Float64Array, N: number, h: number): CMat {
  const M = 2 * N;
  const a = new Float64Array(M * M);
  for (let i = 0; i < N; i++) for (let j = 0; j < N; j++) {
    const r = gr[i * N + j]! * h, im = gi[i * N + j]! * h;
    a[i * M + j] = r;
    a[i * M + N + j] = -im;
    a[(N + i) * M + j] = im;
    a[(N + i) * M + N + j] = r;
  }
  const e = expm(a, M);
  const out = czeros(N, N);
  for (let i = 0; i < N; i++) for (let j = 0; j < N; j++) {
    out.re[i * N + j] = e[i * M + j]!;
    out.im[i * N + j] = e[(N + i) * M + j]!;
  }
  return out;
}

function cmul(A: CMat, B: CMat): CMat {
  const out = czeros(A.rows, B.cols);
  const k = A.cols, c = B.cols;
  for (let i = 0; i < A.rows; i++) for (let p = 0; p < k; p++) {
    const ar = A.re[i * k + p]!, ai = A.im[i * k + p]!;
    if (ar === 0 && ai === 0) continue;
    for (let j = 0; j < c; j++) {
      const br = B.re[p * c + j]!, bi = B.im[p * c + j]!;
      out.re[i * c + j]! += ar * br - ai * bi;
      out.im[i * c + j]! += ar * bi + ai * br;
    }
  }
  return out;
}

/**
 * Sampled-data (exact small-signal) response of `output` to a sinusoidal perturbation of the
 * independent source `source`, at the periodic steady state `ss` of a fixed-frequency system.
 * Returns the complex ratio (output component at f) / (source amplitude) for each frequency.
 *
 * Limitation: controllers that compute timer delays or block resets from values they read at
 * an instant (digital controllers, adaptive on-times) are linearized as if those were fixed.
 */
export function sampledDataResponse(model: CircuitModel, ss: SteadyState, source: string, output: string, frequenciesHz: readonly number[]): ResponsePoint[] {
  const c = model.circuit;
  const k = c.inputNames.indexOf(source);
  if (k <= 0) throw new RangeError(`source: unknown independent source "${source}"; sources: ${c.inputNames.slice(1).join(', ')}`);
  try {
    model.resolve(output);
  } catch (err) {
    throw new RangeError(`output: ${(err as Error).message}`);
  }
  return frequenciesHz.map((f) => {
    if (!(f > 0 && Number.isFinite(f))) throw new RangeError(`frequenciesHz must be > 0, got ${String(f)}`);
    const v = responseAt(model, ss.chain, k, output, 2 * Math.PI * f);
    return { frequencyHz: f, value: v, ...bode(v) };
  });
}

function responseAt(model: CircuitModel, chain: Chain, k: number, output: string, w: number): Complex {
  const { nx, n, items, periodS: T } = chain;
  const N = nx + 2; // [xi; eps; I]
  const C = nx + 1; // columns: [xi0; eps]
  let Z = czeros(N, C);
  for (let i = 0; i < nx; i++) Z.re[i * C + i] = 1;
  Z.re[nx * C + nx] = 1;
  const shifts: { re: Float64Array; im: Float64Array; timeS: number }[] = [];
  const rowOf = (key: number): Float64Array => model.topology(key).signalRow(output);
  for (const item of items) {
    if (item.kind === 'segment') {
      const t = model.topology(item.key);
      const gr = new Float64Array(N * N), gi = new Float64Array(N * N);
      for (let i = 0; i < nx; i++) {
        for (let j = 0; j < nx; j++) gr[i * N + j] = t.m[i * n + j]!;
        gi[i * N + i] = -w;
        gr[i * N + nx] = t.m[i * n + nx + k]!;
      }
      const r = rowOf(item.key);
      for (let j = 0; j < nx; j++) gr[(nx + 1) * N + j] = r[j]!;
      gr[(nx + 1) * N + nx] = r[nx + k]!;
      Z = cmul(cexpm(gr, gi, N, item.durationS), Z);
      continue;
    }
    const fm = derivative(model, item.before, item.wBefore);
    const fp = derivative(model, item.after, item.wAfter);
    const sr = new Float64Array(C), si = new Float64Array(C);
    const tm = item.timing;
    if (tm.kind === 'guard') {
      let nf = 0;
      for (let i = 0; i < nx; i++) nf += tm.row[i]! * fm[i]!;
      if (!(Math.abs(nf) > 0)) throw new Error(`guard crossed tangentially at t = ${item.timeS} s`);
      for (let j = 0; j < C; j++) {
        let vr = tm.row[nx + k]! * Z.re[nx * C + j]!, vi = tm.row[nx + k]! * Z.im[nx * C + j]!;
        for (let i = 0; i < nx; i++) {
          vr += tm.row[i]! * Z.re[i * C + j]!;
          vi += tm.row[i]! * Z.im[i * C + j]!;
        }
        sr[j] = -vr / nf;
        si[j] = -vi / nf;
      }
    } else if (tm.kind === 'timer') {
      const o = shifts[tm.origin];
      if (o !== undefined) {
        // the same absolute time shift, seen in the frame rotated to this later instant
        const ph = -w * (item.timeS - o.timeS), cr = Math.cos(ph), ci = Math.sin(ph);
        for (let j = 0; j < C; j++) {
          sr[j] = o.re[j]! * cr - o.im[j]! * ci;
          si[j] = o.re[j]! * ci + o.im[j]! * cr;
        }
      }
    }
    shifts[item.index] = { re: sr, im: si, timeS: item.timeS };
    const rb = rowOf(item.before), ra = rowOf(item.after);
    let yb = 0, ya = 0;
    for (let j = 0; j < n; j++) {
      yb += rb[j]! * item.wBefore[j]!;
      ya += ra[j]! * item.wAfter[j]!;
    }
    const zero = [...item.resets];
    for (const s of model.topology(item.after).heldInductors) zero.push(s);
    for (let j = 0; j < C; j++) {
      Z.re[(nx + 1) * C + j]! += (yb - ya) * sr[j]!;
      Z.im[(nx + 1) * C + j]! += (yb - ya) * si[j]!;
      for (let i = 0; i < nx; i++) {
        const isReset = zero.includes(i);
        const coef = (isReset ? 0 : fm[i]!) - fp[i]!;
        const br = isReset ? 0 : Z.re[i * C + j]!, bi = isReset ? 0 : Z.im[i * C + j]!;
        Z.re[i * C + j] = br + coef * sr[j]!;
        Z.im[i * C + j] = bi + coef * si[j]!;
      }
    }
  }
  // periodic xi: (I - Psi) xi0 = psi
  const A = czeros(nx, nx), b = czeros(nx, 1);
  for (let i = 0; i < nx; i++) {
    for (let j = 0; j < nx; j++) {
      A.re[i * nx + j] = (i === j ? 1 : 0) - Z.re[i * C + j]!;
      A.im[i * nx + j] = -Z.im[i * C + j]!;
    }
    b.re[i] = Z.re[i * C + nx]!;
    b.im[i] = Z.im[i * C + nx]!;
  }
  const xi = csolve(A, b);
  if (xi === null) throw new Error(`I - Psi is singular at ${w / (2 * Math.PI)} Hz: a Floquet multiplier sits at e^{jwT}`);
  let re = Z.re[(nx + 1) * C + nx]!, im = Z.im[(nx + 1) * C + nx]!;
  for (let j = 0; j < nx; j++) {
    const lr = Z.re[(nx + 1) * C + j]!, li = Z.im[(nx + 1) * C + j]!;
    re += lr * xi.re[j]! - li * xi.im[j]!;
    im += lr * xi.im[j]! + li * xi.re[j]!;
  }
  return { re: re / T, im: im / T };
}

/** Options of {@link sineInjectionResponse}. */
export interface SineInjectionOptions {
  /** Source (independent voltage or current source id) the sine is added to. */
  readonly source: string;
  readonly output: string;
  /** Injected amplitude, in the source's unit (keep it small: the response is linearized by it). */
  readonly amplitude: number;
  /** Switching periods in the measurement window (default 100); frequencies are rounded to multiples of fs / window. */
  readonly windowPeriods?: number;
  /** Settling periods before the window (default: enough for the slowest Floquet multiplier to shrink the start transient by 1e-6, at most 20000). */
  readonly settlePeriods?: number;
}

/**
 * Frequency response by sine injection on the transient simulation, started at the periodic
 * steady state. Each frequency is rounded to a whole number of cycles in the window, so the
 * switching ripple and the injected sine are orthogonal there; the Fourier integrals are the
 * engine's exact integrals of the output times the injected oscillator's sine and cosine.
 */
export function sineInjectionResponse(sys: SwitchingSystem, ss: SteadyState, frequenciesHz: readonly number[], options: SineInjectionOptions): ResponsePoint[] {
  const spec: CircuitSpec = sys.circuit instanceof CircuitModel ? sys.circuit.circuit.spec : sys.circuit;
  const T = ss.periodS;
  const W = options.windowPeriods ?? 100;
  if (!(Number.isInteger(W) && W >= 1)) throw new RangeError(`windowPeriods must be an integer >= 1, got ${String(W)}`);
  if (!(options.amplitude > 0 && Number.isFinite(options.amplitude))) throw new RangeError(`amplitude must be > 0, got ${String(options.amplitude)}`);
  const el = spec.elements.find((e) => e.id === options.source);
  if (el === undefined || (el.kind !== 'voltage-source' && el.kind !== 'current-source')) throw new RangeError(`source: "${options.source}" is not an independent source of the circuit`);
  if (el.sine !== undefined) throw new RangeError(`source: "${options.source}" already has a sine`);
  const rho = Math.max(1e-3, ...ss.multipliers.map((m) => m.magnitude).filter((m) => m < 1));
  const settle = options.settlePeriods ?? Math.min(20000, Math.ceil(Math.log(1e-6) / Math.log(rho)));
  const base = modelOf(sys);
  const init: Record<string, number> = {};
  base.circuit.stateNames.forEach((nm, i) => (init[nm] = ss.state[i]!));
  return frequenciesHz.map((fReq) => {
    if (!(fReq > 0 && fReq < 0.5 / T)) throw new RangeError(`frequenciesHz must be in (0, fs/2), got ${String(fReq)}`);
    const m = Math.max(1, Math.round(fReq * W * T));
    const f = m / (W * T);
    const elements: ElementSpec[] = spec.elements.map((e) => (e.id === options.source ? { ...e, sine: { amplitude: options.amplitude, frequencyHz: f } } as ElementSpec : e));
    const model = new CircuitModel({ ...spec, elements });
    const sinName = `${options.source}.sin`, cosName = `${options.source}.cos`;
    const run1 = new Simulation(model, { stopS: settle * T, timeBaseS: T, controller: sys.createController(), initialState: init }).run();
    if (run1.status === 'failed') throw new Error(`sine injection at ${f} Hz failed while settling: ${run1.message}`);
    // the oscillator's phase at the window start is carried in its states
    const run2 = new Simulation(model, {
      stopS: W * T, timeBaseS: T, controller: sys.createController(), initialState: run1.state,
      integrals: [{ name: 's', of: options.output, times: sinName }, { name: 'c', of: options.output, times: cosName }],
    }).run();
    if (run2.status === 'failed') throw new Error(`sine injection at ${f} Hz failed: ${run2.message}`);
    const a = (2 / (W * T)) * run2.integrals.s!, b = (2 / (W * T)) * run2.integrals.c!;
    const v = { re: a / options.amplitude, im: b / options.amplitude };
    return { frequencyHz: f, value: v, ...bode(v) };
  });
}

/** Convenience: steady state then sampled-data response in one call (fixed-frequency systems). */
export function switchingFrequencyResponse(sys: SwitchingSystem, source: string, output: string, frequenciesHz: readonly number[]): { steadyState: SteadyState; points: ResponsePoint[] } {
  const ss = periodicSteadyState(sys);
  if (ss.status !== 'converged') throw new Error(`no periodic steady state: ${ss.message}`);
  return { steadyState: ss, points: sampledDataResponse(modelOf(sys), ss, source, output, frequenciesHz) };
}
