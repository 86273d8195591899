/**
 * Periodic steady state by shooting on the cycle map, with the exact Jacobian of the map, and
 * the Floquet multipliers of the orbit.
 *
 * Shooting: Newton's method on F(x) = P(x) - x where P maps the state at the start of a period
 * to the state one period later (Aprille and Trick, 1972, "Steady-state analysis of nonlinear
 * circuits with periodic inputs").
 *
 * The Jacobian of P is the product, along the period, of the exact segment propagators and of
 * the saltation matrices at switching instants, S = R + (f+ - R f-) n^T / (n^T f-) for a guard
 * n^T x + c = 0 with vector fields f- before and f+ after, R the reset map of controller state
 * resets (Aizerman and Gantmacher, 1958, "Determination of stability by linear approximation of
 * a periodic solution of a system of differential equations with discontinuous right-hand
 * sides"; Leine and Nijmeijer, 2004, "Dynamics and Bifurcations of Non-Smooth Mechanical
 * Systems"). Timers a controller starts (with `after`) at a guard instant move with that instant,
 * so their instants take its time sensitivity. Perturbations of the constant inputs (sources)
 * are carried along too, which gives the sensitivity of the cycle map to a control input.
 */
import { CircuitModel, Simulation, simulate } from '@edgewise/engine';
import { eigenvalues, solveReal, type Complex } from './linalg.ts';
import {
  derivative,
  modelOf,
  propagator,
  traceCycle,
  validateSection,
  type Chain,
  type Section,
  type SwitchingSystem,
} from './trace.ts';

/** Jacobian of the cycle map from a chain. */
export interface CycleJacobian {
  /** d x(end) / d w(start), nx x n row-major (columns: states, then inputs). */
  readonly jw: Float64Array;
  /** d period / d w(start), seconds per unit (zero for a fixed-period section). */
  readonly dPeriod: Float64Array;
}

/** Reset matrix application: zero the rows of reset states (and of inductors held at zero after). */
function resetRows(model: CircuitModel, resets: readonly number[], after: number): number[] {
  const rows = [...resets];
  for (const s of model.topology(after).heldInductors) if (!rows.includes(s)) rows.push(s);
  return rows;
}

/**
 * Exact Jacobian of the cycle map along a traced chain (segment propagators and saltation
 * matrices). Throws when a guard is crossed tangentially (the saltation matrix is undefined).
 */
export function chainJacobian(model: CircuitModel, chain: Chain): CycleJacobian {
  const { nx, n, items } = chain;
  let J = new Float64Array(nx * n);
  for (let i = 0; i < nx; i++) J[i * n + i] = 1;
  const sens: Float64Array[] = [];
  let dPeriod = new Float64Array(n);
  for (let it = 0; it < items.length; it++) {
    const item = items[it]!;
    if (item.kind === 'segment') {
      const E = propagator(model, item.key, item.durationS);
      const out = new Float64Array(nx * n);
      for (let i = 0; i < nx; i++) {
        for (let k = 0; k < nx; k++) {
          const e = E[i * n + k]!;
          if (e === 0) continue;
          for (let j = 0; j < n; j++) out[i * n + j]! += e * J[k * n + j]!;
        }
        for (let j = nx; j < n; j++) out[i * n + j]! += E[i * n + j]!;
      }
      J = out;
      continue;
    }
    const fm = derivative(model, item.before, item.wBefore);
    const fp = derivative(model, item.after, item.wAfter);
    const s = new Float64Array(n);
    const tm = item.timing;
    if (tm.kind === 'guard') {
      let nf = 0;
      for (let i = 0; i < nx; i++) nf += tm.row[i]! * fm[i]!;
      if (!(Math.abs(nf) > 0)) {
        throw new Error(`guard crossed tangentially at t = ${item.timeS} s (zero slope): the saltation matrix is undefined there`);
      }
      for (let j = 0; j < n; j++) {
        let v = j >= nx ? tm.row[j]! : 0;
        for (let i = 0; i < nx; i++) v += tm.row[i]! * J[i * n + j]!;
        s[j] = -v / nf;
      }
    } else if (tm.kind === 'timer') {
      const o = sens[tm.origin];
      if (o !== undefined) s.set(o);
    }
    sens[item.index] = s;
    const zero = resetRows(model, item.resets, item.after);
    const last = it === items.length - 1;
    for (let i = 0; i < nx; i++) {
      const isReset = zero.includes(i);
      // interior: R J + (R f- - f+) s; section end (state at the perturbed time): R (J + f- s)
      const rf = isReset ? 0 : fm[i]!;
      const coef = last ? rf : rf - fp[i]!;
      for (let j = 0; j < n; j++) {
        const base = isReset ? 0 : J[i * n + j]!;
        J[i * n + j] = base + coef * s[j]!;
      }
    }
    if (last) dPeriod = s;
  }
  return { jw: J, dPeriod };
}

/** A Floquet multiplier of the periodic orbit. */
export interface FloquetMultiplier extends Complex {
  readonly magnitude: number;
}

/** Stability of the orbit from its multipliers. */
export type OrbitStability =
  /** Every multiplier inside the unit circle. */
  | 'stable'
  /** A real multiplier below -1: period doubling (subharmonic oscillation). */
  | 'subharmonic'
  /** A real multiplier above 1: the orbit drifts away (e.g. a positive-feedback loop). */
  | 'unstable-real'
  /** A complex pair outside the unit circle: a slow oscillation grows around the orbit. */
  | 'unstable-oscillatory';

/** Options of {@link periodicSteadyState}; every field optional. */
export interface ShootingOptions {
  /** Where a period ends (default one clock period, `{ kind: 'clock' }`). */
  readonly section?: Section;
  /** Starting state: w = [x; u] or x, or values by state name (default: the circuit's initial state). */
  readonly initialState?: Float64Array | Readonly<Record<string, number>>;
  /** Periods simulated before Newton starts, to get into the right switching sequence (default 5). */
  readonly warmupPeriods?: number;
  /** Newton iterations allowed (default 40). */
  readonly maxIterations?: number;
  /** Converged when max |P(x) - x| <= tolerance * max(|x|, 1e-3 scale) (default 1e-11). */
  readonly tolerance?: number;
  /** Jacobian: exact (chain of propagators and saltation matrices, default) or central finite differences. */
  readonly jacobian?: 'exact' | 'finite-difference';
}

/** A periodic steady state. */
export interface SteadyState {
  readonly status: 'converged';
  /** State w = [x; u] at the start of the period (after the section's switching instant). */
  readonly state: Float64Array;
  readonly stateNames: readonly string[];
  /** Period of the orbit, seconds. */
  readonly periodS: number;
  readonly iterations: number;
  /** Final relative residual max |P(x) - x| / max |x|. */
  readonly residual: number;
  /** Monodromy matrix dP/dx, nx x nx row-major. */
  readonly monodromy: Float64Array;
  /** Sensitivity of the cycle map to the inputs (sources, after u[0] = 1), nx x nu row-major. */
  readonly inputSensitivity: Float64Array;
  /** Sensitivity of the period to the start state and inputs, seconds per unit (zero for clock sections). */
  readonly periodSensitivity: Float64Array;
  readonly multipliers: readonly FloquetMultiplier[];
  /** Largest multiplier magnitude. */
  readonly spectralRadius: number;
  readonly stability: OrbitStability;
  /** The traced steady-state period (segments and instants). */
  readonly chain: Chain;
  /**
   * States the cycle map leaves unchanged whatever the others do (their monodromy row is a unit
   * row and they do not move): kept at their start values and left out of the Newton solve and
   * of the multipliers.
   */
  readonly conservedStates: readonly string[];
  /** Human summary: stability and the dominant multiplier. */
  readonly message: string;
}

/** Shooting that did not converge: never a wrong cycle. */
export interface SteadyStateFailure {
  readonly status: 'not-converged' | 'failed';
  readonly message: string;
  readonly iterations: number;
  /** Last relative residual (Infinity when no period could be run). */
  readonly residual: number;
  /** Last iterate. */
  readonly state: Float64Array;
}

export type SteadyStateResult = SteadyState | SteadyStateFailure;

function relResidual(p: Float64Array, x: Float64Array, nx: number): number {
  let d = 0, s = 0;
  for (let i = 0; i < nx; i++) {
    d = Math.max(d, Math.abs(p[i]! - x[i]!));
    s = Math.max(s, Math.abs(x[i]!), Math.abs(p[i]!));
  }
  return d / Math.max(s, 1e-300);
}

function classify(mult: readonly FloquetMultiplier[]): { stability: OrbitStability; radius: number; dominant: FloquetMultiplier | undefined } {
  let dominant: FloquetMultiplier | undefined;
  for (const m of mult) if (dominant === undefined || m.magnitude > dominant.magnitude) dominant = m;
  const radius = dominant?.magnitude ?? 0;
  if (dominant === undefined || radius < 1) return { stability: 'stable', radius, dominant };
  const real = Math.abs(dominant.im) <= 1e-9 * radius;
  return { stability: real ? (dominant.re < 0 ? 'subharmonic' : 'unstable-real') : 'unstable-oscillatory', radius, dominant };
}

/** Floquet multipliers (eigenvalues of the monodromy) with their magnitudes, largest first. */
export function floquetMultipliers(monodromy: Float64Array, nx: number): FloquetMultiplier[] {
  return eigenvalues(monodromy, nx)
    .map((z) => ({ re: z.re, im: z.im, magnitude: Math.hypot(z.re, z.im) }))
    .sort((a, b) => b.magnitude - a.magnitude);
}

/** Resolves a start state through the engine (names, x or w) including the controller's start actions. */
function startState(model: CircuitModel, sys: SwitchingSystem, init: ShootingOptions['initialState']): Float64Array {
  const sim = new Simulation(model, {
    stopS: 0, timeBaseS: sys.timeBaseS, controller: sys.createController(), ...(init !== undefined ? { initialState: init } : {}),
  });
  if (sim.status === 'failed') throw new Error(`initial state: ${sim.message}`);
  return new Float64Array(sim.state);
}

function fdJacobian(model: CircuitModel, sys: SwitchingSystem, section: Section, w: Float64Array, nx: number, n: number): Float64Array {
  const J = new Float64Array(nx * n);
  for (let j = 0; j < nx; j++) {
    const h = 1e-6 * Math.max(1e-3, Math.abs(w[j]!));
    const wp = new Float64Array(w), wm = new Float64Array(w);
    wp[j]! += h;
    wm[j]! -= h;
    const pp = traceCycle(model, sys, section, wp).run.state;
    const pm = traceCycle(model, sys, section, wm).run.state;
    for (let i = 0; i < nx; i++) J[i * n + j] = (pp[i]! - pm[i]!) / (2 * h);
  }
  return J;
}

/**
 * Indices of the states the Newton solve works on. A state is conserved when, over one period,
 * it does not move and its row of the monodromy restricted to the remaining states is a unit
 * row (it depends on nothing that moves): a fixed reference, an integrator whose input is
 * zero. Found iteratively, since freezing one state can expose another (a value whose slope is
 * a conserved zero).
 */
function freeStates(jw: Float64Array, x0: Float64Array, x1: Float64Array, nx: number, n: number): number[] {
  const frozen = new Uint8Array(nx);
  for (let changed = true; changed; ) {
    changed = false;
    for (let i = 0; i < nx; i++) {
      if (frozen[i]) continue;
      if (Math.abs(x1[i]! - x0[i]!) > 1e-13 * Math.max(1, Math.abs(x0[i]!))) continue;
      if (Math.abs(jw[i * n + i]! - 1) > 1e-12) continue;
      let unit = true;
      for (let j = 0; j < nx && unit; j++) if (j !== i && !frozen[j] && Math.abs(jw[i * n + j]!) > 1e-12) unit = false;
      if (unit) {
        frozen[i] = 1;
        changed = true;
      }
    }
  }
  const free: number[] = [];
  for (let i = 0; i < nx; i++) if (!frozen[i]) free.push(i);
  return free;
}

/**
 * Periodic steady state of a switching system by shooting with the exact Jacobian, with its
 * Floquet multipliers and stability. Returns a failure (never a wrong cycle) when Newton does
 * not converge, naming iterations, residual and the likely cause.
 */
export function periodicSteadyState(sys: SwitchingSystem, options: ShootingOptions = {}): SteadyStateResult {
  const section = options.section ?? { kind: 'clock' };
  const maxIt = options.maxIterations ?? 40;
  const tol = options.tolerance ?? 1e-11;
  const warm = options.warmupPeriods ?? 5;
  if (!(Number.isInteger(maxIt) && maxIt >= 1)) throw new RangeError(`maxIterations must be an integer >= 1, got ${String(maxIt)}`);
  if (!(tol > 0 && tol < 1)) throw new RangeError(`tolerance must be in (0, 1), got ${String(tol)}`);
  if (!(Number.isInteger(warm) && warm >= 0)) throw new RangeError(`warmupPeriods must be an integer >= 0, got ${String(warm)}`);
  if (!(sys.timeBaseS > 0 && Number.isFinite(sys.timeBaseS))) throw new RangeError(`timeBaseS must be a time > 0 s, got ${String(sys.timeBaseS)}`);
  validateSection(section);
  const model = modelOf(sys);
  const nx = model.circuit.nx, n = nx + model.circuit.nu;
  const names = model.circuit.stateNames;
  let w: Float64Array;
  try {
    if (section.kind === 'clock' && warm > 0) {
      // one plain run over the warm-up periods: no chain is needed there, and one run instead of
      // one traced run per period spares the per-run set-up that dominated shooting's cost
      const run = simulate(model, {
        stopS: warm * (section.cycles ?? 1) * sys.timeBaseS, timeBaseS: sys.timeBaseS, controller: sys.createController(),
        ...(options.initialState !== undefined ? { initialState: options.initialState } : {}),
      });
      if (run.status === 'failed') throw new Error(run.message);
      w = new Float64Array(run.state);
    } else {
      w = startState(model, sys, options.initialState);
      for (let k = 0; k < warm; k++) w = new Float64Array(traceCycle(model, sys, section, w).run.state);
    }
  } catch (err) {
    return { status: 'failed', message: `shooting could not run the warm-up periods: ${(err as Error).message}`, iterations: 0, residual: Infinity, state: new Float64Array(model.circuit.initialState) };
  }
  let chain: Chain;
  let it = 0;
  let res = Infinity;
  try {
    chain = traceCycle(model, sys, section, w);
    res = relResidual(chain.run.state, w, nx);
    for (;;) {
      if (res <= tol) break;
      if (it >= maxIt) {
        return { status: 'not-converged', message: `shooting did not converge in ${it} Newton iterations (relative residual ${res.toExponential(3)} > ${tol}): the switching sequence probably changes between iterates (an orbit on a mode boundary, or a start far from it; try more warmupPeriods), or there is no periodic orbit`, iterations: it, residual: res, state: w };
      }
      it++;
      const jw = options.jacobian === 'finite-difference' ? fdJacobian(model, sys, section, w, nx, n) : chainJacobian(model, chain).jw;
      // (dP/dx - I) dx = -(P(x) - x), over the states that are not conserved (see conservedStates)
      const free = freeStates(jw, w, chain.run.state, nx, n);
      const nf = free.length;
      const A = new Float64Array(nf * nf);
      const rhs = new Float64Array(nf);
      for (let a = 0; a < nf; a++) {
        const i = free[a]!;
        for (let b = 0; b < nf; b++) A[a * nf + b] = jw[i * n + free[b]!]! - (a === b ? 1 : 0);
        rhs[a] = -(chain.run.state[i]! - w[i]!);
      }
      const dxf = solveReal(A, rhs, nf, 1);
      const dx = dxf === null ? null : new Float64Array(nx);
      if (dx !== null && dxf !== null) for (let a = 0; a < nf; a++) dx[free[a]!] = dxf[a]!;
      if (dx === null) {
        const stuck = names.filter((_, i) => Math.abs(jw[i * n + i]! - 1) < 1e-9 && names.every((__, j) => j === i || Math.abs(jw[i * n + j]!) < 1e-12));
        return {
          status: 'not-converged',
          message: `shooting stopped at iteration ${it}: a Floquet multiplier equals 1 (dP/dx - I is singular, residual ${res.toExponential(3)})${stuck.length ? `; states that never return: ${stuck.join(', ')} (a ramp never reset, an integrator without feedback, or a sine off the period)` : ''}`,
          iterations: it, residual: res, state: w,
        };
      }
      // damped Newton: halve the step while the residual grows
      let lambda = 1;
      let accepted = false;
      for (let k = 0; k < 8; k++) {
        const wn = new Float64Array(w);
        for (let i = 0; i < nx; i++) wn[i]! += lambda * dx[i]!;
        let cn: Chain;
        try {
          cn = traceCycle(model, sys, section, wn);
        } catch {
          lambda /= 2;
          continue;
        }
        const rn = relResidual(cn.run.state, wn, nx);
        if (rn < res || k === 7) {
          w = wn;
          chain = cn;
          res = rn;
          accepted = true;
          break;
        }
        lambda /= 2;
      }
      if (!accepted) {
        return { status: 'not-converged', message: `shooting failed at iteration ${it}: every damped Newton step ran into a failing period`, iterations: it, residual: res, state: w };
      }
    }
    const jac = chainJacobian(model, chain);
    const mono = new Float64Array(nx * nx);
    const inSens = new Float64Array(nx * (n - nx));
    for (let i = 0; i < nx; i++) {
      for (let j = 0; j < nx; j++) mono[i * nx + j] = jac.jw[i * n + j]!;
      for (let j = nx; j < n; j++) inSens[i * (n - nx) + j - nx] = jac.jw[i * n + j]!;
    }
    // multipliers of the states that move; conserved states (a fixed reference, a constant
    // integrator input) have multiplier 1 by construction and say nothing about stability
    const free = freeStates(jac.jw, w, chain.run.state, nx, n);
    const nf = free.length;
    const monoFree = new Float64Array(nf * nf);
    for (let a = 0; a < nf; a++) for (let b = 0; b < nf; b++) monoFree[a * nf + b] = mono[free[a]! * nx + free[b]!]!;
    const mult = floquetMultipliers(monoFree, nf);
    const conserved = names.filter((_, i) => i < nx && !free.includes(i));
    const cl = classify(mult);
    const dom = cl.dominant;
    const domText = dom === undefined ? 'no states' : `${dom.re.toPrecision(6)}${dom.im !== 0 ? ` ${dom.im >= 0 ? '+' : '-'} ${Math.abs(dom.im).toPrecision(6)}i` : ''} (|mu| = ${dom.magnitude.toPrecision(6)})`;
    const what = {
      stable: 'stable',
      subharmonic: 'unstable: subharmonic (period-doubling) oscillation, a multiplier below -1',
      'unstable-real': 'unstable: a real multiplier above 1',
      'unstable-oscillatory': 'unstable: a complex pair of multipliers outside the unit circle',
    }[cl.stability];
    return {
      status: 'converged',
      state: new Float64Array(w),
      stateNames: names,
      periodS: chain.periodS,
      iterations: it,
      residual: res,
      monodromy: mono,
      inputSensitivity: inSens,
      periodSensitivity: jac.dPeriod,
      multipliers: mult,
      spectralRadius: cl.radius,
      stability: cl.stability,
      chain,
      conservedStates: conserved,
      message: `periodic steady state after ${it} Newton iterations (residual ${res.toExponential(2)}), period ${chain.periodS.toPrecision(8)} s; orbit ${what}; dominant multiplier ${domText}`,
    };
  } catch (err) {
    return { status: 'failed', message: `shooting failed at iteration ${it}: ${(err as Error).message}`, iterations: it, residual: res, state: w };
  }
}
