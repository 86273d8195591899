// odex (Hairer and Wanner's GBS extrapolation code in JavaScript) as an independent reference
// integrator for tests and benchmarks. Its package ships TypeScript sources that do not pass our
// strict settings, so it is loaded through require with the part of its API we use typed here.
import { createRequire } from 'node:module';

/** The part of odex's Solver used here. */
export interface OdexSolver {
  absoluteTolerance: number;
  relativeTolerance: number;
  maxSteps: number;
  initialStepSize: number;
  denseOutput: boolean;
  solve(
    f: (x: number, y: number[]) => number[],
    x0: number,
    y0: number[],
    x1: number,
    out?: (n: number, xOld: number, x: number, y: number[], dense?: (i: number, x: number) => number) => boolean | void,
  ): { y: number[]; nEval: number };
}

export const { Solver } = createRequire(import.meta.url)('odex') as { Solver: new (n: number) => OdexSolver };

/**
 * Integrates from (x0, y0) toward x1 with a dense-output solver until y[0] falls to zero, and
 * locates that zero by bisection on odex's dense output (to 1e-22 s). Returns the end state
 * when there is no zero, else the zero's time and state (y[0] set to exactly 0).
 */
export function solveToFallingZero(
  dense: OdexSolver,
  f: (x: number, y: number[]) => number[],
  x0: number,
  y0: number[],
  x1: number,
): { y: number[]; nEval: number; event: number | null } {
  let event: number | null = null;
  let yEvent: number[] | null = null;
  const r = dense.solve(f, x0, y0, x1, (_n, xOld, x, yy, interp) => {
    if (yy[0]! <= 0 && interp) {
      let lo = xOld, hi = x;
      for (let it = 0; it < 200 && hi - lo > 1e-22; it++) {
        const mid = 0.5 * (lo + hi);
        if (interp(0, mid) > 0) lo = mid;
        else hi = mid;
      }
      event = 0.5 * (lo + hi);
      yEvent = yy.map((_, i) => (i === 0 ? 0 : interp(i, event!)));
      return false;
    }
    return true;
  });
  return yEvent === null ? { y: r.y, nEval: r.nEval, event: null } : { y: yEvent, nEval: r.nEval, event };
}
