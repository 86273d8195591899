/**
 * DCM averaged models derived from the circuit's own three topologies: interval 1 (main switch
 * on, d1), interval 2 (rectifier on, d2) and interval 3 (both off, the inductor current rests
 * at zero, 1 - d1 - d2).
 *
 * Full order (Sun, Mitchell, Greuel, Krein and Bass, 2001, "Averaged modeling of PWM
 * converters operating in discontinuous conduction mode", IEEE Trans. Power Electronics 16(4)):
 * the average inductor current i stays a state; d2 follows from it through the triangle,
 * i = ipk (d1 + d2) / 2 with ipk = vL1 d1 Ts / L, so d2 = 2 L i / (d1 Ts vL1) - d1; and the
 * state equations are dx/dt = (d1 A1 + d2 A2 + d3 A3) W x + (d1 B1 + d2 B2 + d3 B3) u, where W
 * divides the inductor current by d1 + d2 (the current flows only during those intervals, so
 * each interval sees i / (d1 + d2) on average).
 *
 * Reduced order (the classic model; the averaged switch model of Erickson and Maksimovic,
 * Fundamentals of Power Electronics, 2nd ed., ch. 11): the inductor dynamics are neglected,
 * L di/dt = 0, which gives d2 by volt-second balance, d2 = -d1 vL1 / vL2, and i as an algebraic
 * function of the other states. The same equations with that constraint, so both models share
 * their DC operating point, the DCM conversion ratio M(D, K) (ibid., ch. 5).
 *
 * Small-signal models are the Jacobians of these equations at the operating point, by central
 * differences with relative steps of 1e-6 (smooth functions: relative error ~1e-9).
 *
 * Parasitics enter through the topologies' matrices, but the constraint uses the straight-line
 * current triangle (exact only for ideal parts): winding resistance, ESR and diode drops are
 * first-order corrections here, and the tests use ideal stages.
 */
import type { CircuitModel, Topology } from '@edgewise/engine';
import { evaluateStateSpace, topologyKeyOf, type AveragedModel, type StateSpace, type TransferFunction } from './averaging.ts';
import { solveReal } from './linalg.ts';
import { modelOf, type SwitchingSystem } from './trace.ts';

/** Options of {@link dcmAveragedModel}. */
export interface DcmAveragingOptions {
  /** 'reduced' (inductor dynamics neglected) or 'full' (Sun et al. 2001). */
  readonly order: 'reduced' | 'full';
  /** Devices conducting in interval 1 (main switch on), e.g. ["Q1"]. */
  readonly on: readonly string[];
  /** Devices conducting in interval 2 (rectifier on), e.g. ["D1"]. */
  readonly off: readonly string[];
  /** Devices conducting in interval 3 (inductor current at zero); default none. */
  readonly idle?: readonly string[];
  /** Duty of the main switch d1 in (0, 1). */
  readonly duty: number;
  /** Switching period Ts, seconds. */
  readonly periodS: number;
  /** State name of the inductor whose current goes discontinuous (default: the one held at zero in interval 3). */
  readonly inductor?: string;
}

/** A DCM averaged model (reduced or full order). */
export interface DcmAveragedModel extends AveragedModel {
  readonly kind: 'dcm-reduced' | 'dcm-full';
  readonly duty: number;
  /** d2 at the operating point: the fraction of the period the rectifier conducts. */
  readonly d2: number;
  /** Peak inductor current at the operating point, amperes. */
  readonly peakCurrentA: number;
}

interface Parts {
  a: Float64Array[]; // per interval, nx x nx
  b: Float64Array[]; // per interval, nx x nu
  t: Topology[];
}

/**
 * Builds a DCM averaged model of a converter from its circuit (any of the stage builders'
 * circuits, or a hand-written one): the three topologies give the matrices, the element values
 * come with them. Throws a RangeError naming the option for bad input, and an Error when the
 * operating point is not in DCM (d1 + d2 >= 1: use the CCM model) or cannot be found.
 */
export function dcmAveragedModel(circuit: SwitchingSystem['circuit'], options: DcmAveragingOptions): DcmAveragedModel {
  const model: CircuitModel = modelOf({ circuit, createController: () => ({ start() {}, onEvent() {} }), timeBaseS: 1 });
  const o = options;
  if (o?.order !== 'reduced' && o?.order !== 'full') throw new RangeError(`order must be "reduced" or "full", got ${JSON.stringify(o?.order)}`);
  const d1 = o.duty, Ts = o.periodS;
  if (!(d1 > 0 && d1 < 1)) throw new RangeError(`duty must be in (0, 1), got ${String(d1)}`);
  if (!(Ts > 0 && Number.isFinite(Ts))) throw new RangeError(`periodS must be a time > 0 s, got ${String(Ts)}`);
  const c = model.circuit;
  const keys = [topologyKeyOf(model, o.on), topologyKeyOf(model, o.off), topologyKeyOf(model, o.idle ?? [])];
  const tops = keys.map((k) => model.topology(k));
  const names = c.stateNames.filter((nm) => {
    const id = nm.slice(0, nm.indexOf('.'));
    const el = c.spec.elements.find((e) => e.id === id);
    return (el?.kind === 'inductor' && nm.endsWith('.current')) || (el?.kind === 'capacitor' && nm.endsWith('.charge'));
  });
  const idx = names.map((nm) => c.stateNames.indexOf(nm));
  let lName = o.inductor;
  if (lName === undefined) {
    const held = Array.from(tops[2]!.heldInductors).map((s) => c.stateNames[s]!);
    if (held.length !== 1) throw new RangeError(`inductor: name the inductor that goes discontinuous (interval 3 holds ${held.length === 0 ? 'none' : held.join(', ')})`);
    lName = held[0]!;
  }
  const li = names.indexOf(lName);
  if (li < 0) throw new RangeError(`inductor: "${lName}" is not an inductor current state; states: ${names.join(', ')}`);
  const lEl = c.spec.elements.find((e) => e.id === lName!.slice(0, lName!.indexOf('.')));
  const henries = lEl?.kind === 'inductor' ? lEl.henries : Number.NaN;
  const nxF = c.nx, n = nxF + c.nu, nx = idx.length, nu = c.nu;
  const parts: Parts = { a: [], b: [], t: tops };
  for (const t of tops) {
    const a = new Float64Array(nx * nx), b = new Float64Array(nx * nu);
    const held = Array.from(t.heldInductors);
    for (let i = 0; i < nx; i++) {
      for (let j = 0; j < nx; j++) a[i * nx + j] = held.includes(idx[j]!) ? 0 : t.m[idx[i]! * n + idx[j]!]!;
      for (let j = 0; j < nu; j++) b[i * nu + j] = t.m[idx[i]! * n + nxF + j]!;
    }
    parts.a.push(a);
    parts.b.push(b);
  }
  const U = c.initialState.slice(nxF);

  /** L times the inductor's derivative in interval k at (x, u), with the current counted as zero at the start of interval 1. */
  const vL = (k: number, x: Float64Array, u: Float64Array): number => {
    const a = parts.a[k]!, b = parts.b[k]!;
    let s = 0;
    for (let j = 0; j < nx; j++) if (j !== li) s += a[li * nx + j]! * x[j]!;
    for (let j = 0; j < nu; j++) s += b[li * nu + j]! * u[j]!;
    return henries * s;
  };
  /** d2 from the average current (Sun et al. 2001). */
  const d2Of = (x: Float64Array, u: Float64Array, d: number): number => (2 * henries * x[li]!) / (d * Ts * vL(0, x, u)) - d;
  /** Full-order right-hand side. */
  const full = (x: Float64Array, u: Float64Array, d: number, out: Float64Array): void => {
    const e2 = d2Of(x, u, d);
    const w = [d, e2, 1 - d - e2];
    const xs = x.slice();
    xs[li] = x[li]! / (d + e2);
    for (let i = 0; i < nx; i++) {
      let s = 0;
      for (let k = 0; k < 3; k++) {
        const a = parts.a[k]!, b = parts.b[k]!;
        let v = 0;
        for (let j = 0; j < nx; j++) v += a[i * nx + j]! * xs[j]!;
        for (let j = 0; j < nu; j++) v += b[i * nu + j]! * u[j]!;
        s += w[k]! * v;
      }
      out[i] = s;
    }
  };
  /** Quasi-static inductor current (L di/dt = 0): d2 = -d1 vL1 / vL2 and i = ipk (d1 + d2) / 2. */
  const quasiStatic = (x: Float64Array, u: Float64Array, d: number): number => {
    const v1 = vL(0, x, u), v2 = vL(1, x, u);
    const e2 = (-d * v1) / v2;
    return (d * Ts * v1 * (d + e2)) / (2 * henries);
  };
  const reduced = (x: Float64Array, u: Float64Array, d: number, out: Float64Array): void => {
    const xq = x.slice();
    xq[li] = quasiStatic(x, u, d);
    full(xq, u, d, out);
    out[li] = 0;
  };
  const rhs = o.order === 'full' ? full : reduced;

  // DC operating point: Newton on the reduced equations (the inductor row is identically 0 there)
  // from the CCM averaged point, damped to stay where the DCM triangle is defined
  const X = ccmStart(parts, nx, nu, U, d1);
  if (X === null) throw new Error('no starting point: the CCM averaged A is singular');
  const valid = (x: Float64Array): boolean => {
    const v1 = vL(0, x, U), v2 = vL(1, x, U);
    return v1 > 0 && v2 < 0;
  };
  if (!valid(X)) {
    // push the output up until the rectifier interval has a falling current
    for (let k = 0; k < 60 && !valid(X); k++) for (let j = 0; j < nx; j++) if (j !== li) X[j] = X[j]! * 1.1;
    if (!valid(X)) throw new Error('could not find a state where interval 1 charges and interval 2 discharges the inductor');
  }
  const others = [...Array(nx).keys()].filter((j) => j !== li);
  const m = others.length;
  const f = new Float64Array(nx), fp = new Float64Array(nx), fm = new Float64Array(nx);
  const norm = (x: Float64Array): number => {
    reduced(x, U, d1, f);
    let s = 0;
    for (const j of others) s = Math.max(s, Math.abs(f[j]!) / Math.max(Math.abs(x[j]!), 1e-3));
    return s;
  };
  let res = norm(X);
  for (let it = 0; it < 100 && res > 0; it++) {
    reduced(X, U, d1, f);
    const J = new Float64Array(m * m), r = new Float64Array(m);
    for (let q = 0; q < m; q++) {
      const j = others[q]!;
      const h = 1e-7 * Math.max(Math.abs(X[j]!), 1e-3);
      const xp = X.slice(), xm = X.slice();
      xp[j]! += h;
      xm[j]! -= h;
      reduced(xp, U, d1, fp);
      reduced(xm, U, d1, fm);
      for (let p = 0; p < m; p++) J[p * m + q] = (fp[others[p]!]! - fm[others[p]!]!) / (2 * h);
    }
    for (let p = 0; p < m; p++) r[p] = -f[others[p]!]!;
    const dx = solveReal(J, r, m, 1);
    if (dx === null) break;
    let lambda = 1, moved = false;
    for (let k = 0; k < 30; k++) {
      const xn = X.slice();
      others.forEach((j, p) => (xn[j] = X[j]! + lambda * dx[p]!));
      if (valid(xn)) {
        const rn = norm(xn);
        if (rn < res) {
          X.set(xn);
          res = rn;
          moved = true;
          break;
        }
      }
      lambda /= 2;
    }
    if (!moved) break;
  }
  reduced(X, U, d1, f);
  const scale = Math.max(...others.map((j) => Math.abs(X[j]!)), 1e-3);
  // rates relative to the state's size over a period: far below rounding when converged
  if (!others.every((j) => Math.abs(f[j]!) * Ts <= 1e-9 * scale)) throw new Error('the DCM operating point was not found (Newton on the averaged equations did not converge)');
  X[li] = quasiStatic(X, U, d1);
  const D2 = d2Of(X, U, d1);
  if (!(D2 > 0)) throw new Error(`no DCM operating point: d2 = ${D2} <= 0`);
  if (!(d1 + D2 < 1)) {
    throw new Error(`the operating point is in CCM: d1 + d2 = ${(d1 + D2).toPrecision(6)} >= 1 (the inductor current never rests at zero); use ccmAveragedModel`);
  }
  const ipk = (vL(0, X, U) * d1 * Ts) / henries;

  const stateNames = o.order === 'full' ? names : others.map((j) => names[j]!);
  const keep = o.order === 'full' ? [...Array(nx).keys()] : others;
  const nk = keep.length;
  /** Jacobians of rhs over the kept states, the inputs and the duty at the operating point. */
  const jac = (g: (x: Float64Array, u: Float64Array, d: number, out: Float64Array) => void, rows: number) => {
    const ax = new Float64Array(rows * nk), bu = new Float64Array(rows * nu), bd = new Float64Array(rows);
    const op = new Float64Array(rows), om = new Float64Array(rows);
    const col = (set: (sgn: number) => [Float64Array, Float64Array, number], h: number, put: (r: number, v: number) => void): void => {
      const [xp, up, dp] = set(1);
      g(xp, up, dp, op);
      const [xm, um, dm] = set(-1);
      g(xm, um, dm, om);
      for (let r = 0; r < rows; r++) put(r, (op[r]! - om[r]!) / (2 * h));
    };
    keep.forEach((j, q) => {
      const h = 1e-6 * Math.max(Math.abs(X[j]!), 1e-3);
      col((sg) => {
        const x = X.slice();
        x[j]! += sg * h;
        return [x, U, d1];
      }, h, (r, v) => (ax[r * nk + q] = v));
    });
    for (let j = 1; j < nu; j++) {
      const h = 1e-6 * Math.max(Math.abs(U[j]!), 1e-3);
      col((sg) => {
        const u = U.slice();
        u[j]! += sg * h;
        return [X, u, d1];
      }, h, (r, v) => (bu[r * nu + j] = v));
    }
    const hd = 1e-6 * d1;
    col((sg) => [X, U, d1 + sg * hd], hd, (r, v) => (bd[r] = v));
    return { ax, bu, bd };
  };
  const dyn = jac((x, u, d, out) => {
    const full_ = new Float64Array(nx);
    rhs(x, u, d, full_);
    keep.forEach((j, q) => (out[q] = full_[j]!));
  }, nk);

  /** Averaged output equation of a signal (W applied, held inductors counted as zero). */
  const rowsOf = (sig: string): Float64Array[] => {
    try {
      return tops.map((t) => {
        const r = new Float64Array(t.signalRow(sig));
        for (const s of t.heldInductors) r[s] = 0;
        return r;
      });
    } catch (err) {
      throw new RangeError(`signal: ${(err as Error).message}`);
    }
  };
  const outputOf = (rows: Float64Array[]) => (x: Float64Array, u: Float64Array, d: number, out: Float64Array): void => {
    const xf = o.order === 'full' ? x : (() => {
      const xq = x.slice();
      xq[li] = quasiStatic(x, u, d);
      return xq;
    })();
    const e2 = d2Of(xf, u, d);
    const w = [d, e2, 1 - d - e2];
    let s = 0;
    for (let k = 0; k < 3; k++) {
      const r = rows[k]!;
      let v = 0;
      idx.forEach((fi, j) => (v += r[fi]! * (j === li ? xf[j]! / (d + e2) : xf[j]!)));
      for (let j = 0; j < nu; j++) v += r[nxF + j]! * u[j]!;
      s += w[k]! * v;
    }
    out[0] = s;
  };
  const a = dyn.ax;
  const dcState = Float64Array.from(keep.map((j) => X[j]!));
  const tf = (bcol: ArrayLike<number>, cr: ArrayLike<number>, e: number): TransferFunction => (s) => evaluateStateSpace(a, nk, bcol, cr, e, s);
  const kind = o.order === 'full' ? 'dcm-full' : 'dcm-reduced';
  return {
    kind,
    duty: d1,
    d2: D2,
    peakCurrentA: ipk,
    stateNames,
    inputNames: c.inputNames,
    dcState,
    dcValue(sig) {
      const out = new Float64Array(1);
      outputOf(rowsOf(sig))(X, U, d1, out);
      return out[0]!;
    },
    smallSignal(sig): StateSpace {
      const y = jac(outputOf(rowsOf(sig)), 1);
      const b = dyn.bu.slice();
      const d = y.bu.slice();
      return { nx: nk, nu, ny: 1, a: a.slice(), b, c: y.ax, d };
    },
    controlToOutput(sig) {
      const y = jac(outputOf(rowsOf(sig)), 1);
      return tf(dyn.bd, y.ax, y.bd[0]!);
    },
    inputToOutput(source, sig) {
      const u = c.inputNames.indexOf(source);
      if (u <= 0) throw new RangeError(`source: unknown independent source "${source}"; sources: ${c.inputNames.slice(1).join(', ')}`);
      const y = jac(outputOf(rowsOf(sig)), 1);
      const bcol = Array.from({ length: nk }, (_, i) => dyn.bu[i * nu + u]!);
      return tf(bcol, y.ax, y.bu[u]!);
    },
    rippleEstimate(sig) {
      // the inductor current is a triangle from zero to the peak (exact for ideal parts)
      return sig === lName ? ipk : null;
    },
  };
}

/** DC point of the CCM averaged model at duty d (a start for Newton). */
function ccmStart(p: Parts, nx: number, nu: number, U: Float64Array, d: number): Float64Array | null {
  const a = new Float64Array(nx * nx), bu = new Float64Array(nx);
  for (let i = 0; i < nx; i++) {
    for (let j = 0; j < nx; j++) a[i * nx + j] = d * p.a[0]![i * nx + j]! + (1 - d) * p.a[1]![i * nx + j]!;
    let s = 0;
    for (let j = 0; j < nu; j++) s += (d * p.b[0]![i * nu + j]! + (1 - d) * p.b[1]![i * nu + j]!) * U[j]!;
    bu[i] = -s;
  }
  return solveReal(a, bu, nx, 1);
}
