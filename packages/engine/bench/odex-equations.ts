// The benchmark scenarios' piecewise-linear equations written out by hand for odex
// (Hairer and Wanner's GBS extrapolation code), with its own event location on the dense
// output for the diode's zero-current event. Independent of the engine's network solve.
import { Solver, solveToFallingZero } from '../test/odex-solver.ts';

const VIN = 12, L = 4.7e-6, RL = 0.02, C = 22e-6, ESR = 0.005, RON = 0.01;
const LF = 1e-6, RLF = 0.01, CF = 10e-6, ESRF = 0.003, VF = 0.4, RD = 0.02;

type Mode = 'on' | 'off' | 'dcm';

function outVolts(vC: number, iL: number, r: number): number {
  return (r * (vC + ESR * iL)) / (r + ESR);
}

function derivS1(mode: Mode) {
  return (_t: number, y: number[]): number[] => {
    const iL = y[0]!, vC = y[1]!;
    const v = outVolts(vC, iL, 2.5);
    const vsw = mode === 'on' ? VIN - RON * iL : -RON * iL;
    return [(vsw - RL * iL - v) / L, (iL - v / 2.5) / C];
  };
}

function derivS2(mode: Mode) {
  return (_t: number, y: number[]): number[] => {
    const iLf = y[0]!, vCf = y[1]!, iL = y[2]!, vC = y[3]!;
    const ihs = mode === 'on' ? iL : 0;
    const vin = vCf + ESRF * (iLf - ihs);
    const v = outVolts(vC, iL, 2.5);
    const vsw = mode === 'on' ? vin - RON * iL : -RON * iL;
    return [(VIN - RLF * iLf - vin) / LF, (iLf - ihs) / CF, (vsw - RL * iL - v) / L, (iL - v / 2.5) / C];
  };
}

function derivS3(mode: Mode) {
  return (_t: number, y: number[]): number[] => {
    const iL = y[0]!, vC = y[1]!;
    const v = outVolts(vC, iL, 40);
    if (mode === 'dcm') return [0, -v / 40 / C];
    const vsw = mode === 'on' ? VIN - RON * iL : -VF - RD * iL;
    return [(vsw - RL * iL - v) / L, (iL - v / 40) / C];
  };
}

/** Integrates `cycles` cycles from zero at the given tolerance; returns the final state and the number of derivative evaluations. */
export function odexRun(which: 'S1' | 'S2' | 'S3', cycles: number, periodS: number, duty: number, tol: number): { y: number[]; evals: number } {
  const n = which === 'S2' ? 4 : 2;
  const s = new Solver(n);
  s.absoluteTolerance = tol;
  s.relativeTolerance = tol;
  s.maxSteps = 1e7;
  s.initialStepSize = periodS / 100;
  const sd = new Solver(n);
  sd.absoluteTolerance = tol;
  sd.relativeTolerance = tol;
  sd.maxSteps = 1e7;
  sd.initialStepSize = periodS / 100;
  sd.denseOutput = true;
  const deriv = which === 'S1' ? derivS1 : which === 'S2' ? derivS2 : derivS3;
  let y = new Array<number>(n).fill(0);
  let evals = 0;
  for (let k = 0; k < cycles; k++) {
    const t0 = k * periodS;
    const ton = t0 + duty * periodS;
    const t1 = (k + 1) * periodS;
    let r = s.solve(deriv('on'), t0, y, ton);
    evals += r.nEval;
    y = r.y;
    if (which !== 'S3') {
      r = s.solve(deriv('off'), ton, y, t1);
      evals += r.nEval;
      y = r.y;
      continue;
    }
    const z = solveToFallingZero(sd, deriv('off'), ton, y, t1);
    evals += z.nEval;
    if (z.event !== null) {
      r = s.solve(deriv('dcm'), z.event, z.y, t1);
      evals += r.nEval;
      y = r.y;
      y[0] = 0;
    } else y = z.y;
  }
  return { y, evals };
}
