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
