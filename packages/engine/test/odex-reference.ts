// Independent reference: the same piecewise-linear buck equations written out by hand and
// integrated by odex (Hairer and Wanner's GBS extrapolation code, E. Hairer, S. P. Norsett and
// G. Wanner, Solving Ordinary Differential Equations I, 1993), with its own event location
// on the dense output.
import { Solver, solveToFallingZero, type OdexSolver } from './odex-solver.ts';

export interface BuckNumbers {
  vin: number;
  l: number;
  rl: number;
  c: number;
  esr: number;
  r: number;
  ron: number;
  periodS: number;
  duty: number;
  /** diode buck: forward drop and resistance; omitted: synchronous (low side ron) */
  diode?: { vf: number; rd: number };
}

export interface OdexRun {
  x: [number, number];
  /** per cycle: time of the diode zero-current event within the cycle (s), or NaN */
  zeroCrossOffsets: number[];
}

/** x = [iL, vC]. Output node voltage v = R (vC + ESR iL) / (R + ESR). */
function deriv(p: BuckNumbers, mode: 'on' | 'off' | 'dcm') {
  const k = p.r / (p.r + p.esr);
  return (_t: number, y: number[]): number[] => {
    const iL = y[0]!, vC = y[1]!;
    const v = k * (vC + p.esr * iL);
    const iC = iL - v / p.r;
    let vsw: number;
    if (mode === 'on') vsw = p.vin - p.ron * iL;
    else if (mode === 'off') vsw = p.diode ? -p.diode.vf - p.diode.rd * iL : -p.ron * iL;
    else return [0, (-v / p.r) / p.c];
    return [(vsw - p.rl * iL - v) / p.l, iC / p.c];
  };
}

function solver(tol: number): OdexSolver {
  const s = new Solver(2);
  s.absoluteTolerance = tol;
  s.relativeTolerance = tol;
  s.maxSteps = 1e6;
  s.initialStepSize = 1e-9;
  return s;
}

export function runOdexBuck(p: BuckNumbers, cycles: number, tol = 1e-13): OdexRun {
  let y = [0, 0];
  const T = p.periodS;
  const offsets: number[] = [];
  const s = solver(tol);
  const sd = solver(tol);
  sd.denseOutput = true;
  for (let k = 0; k < cycles; k++) {
    const ton = p.duty * T;
    y = s.solve(deriv(p, 'on'), 0, y, ton).y;
    if (!p.diode) {
      y = s.solve(deriv(p, 'off'), ton, y, T).y;
      offsets.push(Number.NaN);
      continue;
    }
    // diode on until its current (= iL) reaches zero: located on odex's dense output
    const r = solveToFallingZero(sd, deriv(p, 'off'), ton, y, T);
    if (r.event !== null) {
      offsets.push(r.event);
      y = s.solve(deriv(p, 'dcm'), r.event, r.y, T).y;
      y[0] = 0;
    } else {
      offsets.push(Number.NaN);
      y = r.y;
    }
  }
  return { x: [y[0]!, y[1]!], zeroCrossOffsets: offsets };
}
