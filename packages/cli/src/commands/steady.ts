/**
 * `edgewise steady FILE`: periodic steady state by shooting (models' periodicSteadyState),
 * its Floquet multipliers and stability, then metrics over periods run from that state.
 * @module
 */
import { periodicSteadyState, type SteadyState } from '@edgewise/models';
import { optFlag, optValue, type ParsedArgs } from '../args.ts';
import { InputError, RunFailure } from '../errors.ts';
import { formatQuantity } from '../units.ts';
import { buildPlan, type Plan } from '../scenario/build.ts';
import { loadScenarioFile } from '../scenario/load.ts';
import { HELP, QUIET, say, scenarioArg, type Command } from './common.ts';
import { executeRun, siblings, type RunTargets } from './run.ts';

/** Shooting result in the summary JSON. */
export function steadyJson(ss: SteadyState): Record<string, unknown> {
  return {
    status: ss.status,
    periodS: ss.periodS,
    iterations: ss.iterations,
    residual: ss.residual,
    stability: ss.stability,
    spectralRadius: ss.spectralRadius,
    multipliers: ss.multipliers.map((m) => ({ re: m.re, im: m.im, magnitude: m.magnitude })),
    state: Object.fromEntries(ss.stateNames.map((n, i) => [n, ss.state[i]!])),
    message: ss.message,
  };
}

/** Finds the periodic steady state of a plan; throws RunFailure (exit 1) when shooting fails. */
export function findSteadyState(plan: Plan, where: string): SteadyState {
  if (plan.createController() === undefined || plan.periodS === undefined) {
    throw new InputError(where, ['plant: a steady state needs a switching plant (plant.drive for raw circuits)']);
  }
  const a = plan.scenario.analyses?.steady;
  const control = plan.scenario.plant.kind === 'stage' ? plan.scenario.plant.control.kind : 'pwm';
  const variable = control === 'constant-on-time' || control === 'hysteretic';
  const result = periodicSteadyState(
    { circuit: plan.model, createController: () => plan.createController()!, timeBaseS: plan.timeBaseS },
    {
      section: variable ? { kind: 'gate-on', gate: plan.mainGate! } : { kind: 'clock' },
      ...(plan.initial !== undefined ? { initialState: plan.initial } : {}),
      ...(a?.maxIterations !== undefined ? { maxIterations: a.maxIterations } : {}),
      ...(a?.tolerance !== undefined ? { tolerance: a.tolerance } : {}),
      ...(a?.warmupCycles !== undefined ? { warmupPeriods: a.warmupCycles } : {}),
    },
  );
  if (result.status !== 'converged') throw new RunFailure(`steady state ${result.status}: ${result.message}`);
  return result;
}

export const steadyCommand: Command = {
  name: 'steady',
  summary: 'periodic steady state by shooting: stability (Floquet multipliers), metrics and losses over steady periods',
  usage: 'edgewise steady FILE [--periods N] [--out FILE.csv] [--summary FILE.json|-] [--report FILE.html] [--quiet]',
  details: 'The summary JSON holds "steadyState" (period, multipliers, stability, state) and the metrics of the periods run from it.',
  options: [
    { name: 'periods', value: 'N', help: 'periods simulated from the steady state for the metrics (default 1)' },
    { name: 'out', value: 'FILE', help: 'CSV of those periods (default: none)' },
    { name: 'summary', value: 'FILE', help: 'summary JSON file, or - for standard output (default -)' },
    { name: 'report', value: 'FILE', help: 'HTML report' },
    QUIET,
    HELP,
  ],
  example: 'edgewise steady examples/pol-buck.json --summary out/steady.json',
  async run(args: ParsedArgs) {
    const file = scenarioArg(args, 'steady');
    const quiet = optFlag(args, 'quiet');
    const { scenario } = loadScenarioFile(file);
    const plan = buildPlan(scenario, file);
    const pText = optValue(args, 'periods');
    const periods = pText === undefined ? 1 : Number(pText);
    if (!(Number.isInteger(periods) && periods >= 1)) throw new InputError('edgewise steady', [`--periods: expected a whole number >= 1, received "${pText}"`]);
    const ss = findSteadyState(plan, file);
    const steadyPlan: Plan = { ...plan, stopS: periods * ss.periodS, fromS: 0, initial: undefined, periodS: ss.periodS, timeBaseS: plan.timeBaseS };
    const out = optValue(args, 'out');
    const sib = out !== undefined ? siblings(out) : undefined;
    const targets: RunTargets = { csv: out, summary: optValue(args, 'summary') ?? sib?.summary ?? '-', report: optValue(args, 'report') ?? sib?.report };
    // The summary is written by executeRun; add the steady state through the outcome hook.
    await executeRun(steadyPlan, targets, quiet, { initialState: ss.state, extra: { steadyState: steadyJson(ss) } });
    say(quiet, `steady state: period ${formatQuantity(ss.periodS, 's')}, ${ss.stability}, spectral radius ${ss.spectralRadius.toPrecision(4)} (${ss.iterations} iterations)`);
    return 0;
  },
};
