/**
 * Efficiency curve of a stage plant over a list of loads: each load is shot to its periodic
 * steady state (continuing from the previous point's state), its power balance measured from
 * exact integrals over one period (models' `steadyStateEfficiency`), and switching losses
 * accounted over the same period when the scenario gives switching-loss data.
 * @module
 */
import { CircuitModel, Simulation } from '@edgewise/engine';
import { periodicSteadyState, steadyStateEfficiency, type EfficiencyReport, type Section as ShootingSection, type SwitchingSystem } from '@edgewise/models';
import { InputError, RunFailure } from '../errors.ts';
import type { Plan } from '../scenario/build.ts';
import { buildStagePlant } from '../scenario/build-stage.ts';
import type { StagePlant } from '../scenario/stage-schema.ts';
import { makeAccountant, switchingWatts, type SwitchingLossJson } from './losses.ts';

/** One point of the curve (powers in watts). */
export interface EfficiencyCurvePoint {
  /** The load: ohms for a resistive load, amperes for a current load. */
  load: number;
  status: 'ok' | 'not-converged';
  message: string;
  periodS: number | null;
  inputW: number | null;
  outputW: number | null;
  /** Output current, amperes: the load current for a current load; RMS from outputW and the resistance for a resistive load. */
  outputA: number | null;
  /** Conduction losses only (the simulated circuit): outputW / inputW. */
  efficiency: number | null;
  /** With the accounted switching losses: outputW / (inputW + switchingW). */
  efficiencyWithSwitching: number | null;
  conductionLossesW: Record<string, number> | null;
  switching: SwitchingLossJson[] | null;
  switchingW: number | null;
  /** Relative power-balance residual of the period (a check of the run, ~1e-12). */
  balanceError: number | null;
}

/** The efficiency curve of a plan (a stage plant with analyses.efficiency). */
export interface EfficiencyCurve {
  loadKind: 'resistor' | 'current';
  loadUnit: 'Ω' | 'A';
  points: EfficiencyCurvePoint[];
}

/** Computes the efficiency curve; InputError for unsuitable scenarios, RunFailure when no point converges. */
export function efficiencyCurve(plan: Plan, where: string, progress?: (done: number, total: number) => void): EfficiencyCurve {
  const scenario = plan.scenario;
  const loads = scenario.analyses?.efficiency?.loads;
  if (loads === undefined) throw new InputError(where, ['analyses.efficiency: missing; add { "loads": [...] } (ohms or amperes, the stage load\'s unit)']);
  const plant = scenario.plant;
  if (plant.kind !== 'stage') throw new InputError(where, ['plant.kind: an efficiency curve needs a stage plant (its load is what is swept)']);
  const kind = plant.load.kind;
  const problems: string[] = [];
  loads.forEach((v, i) => {
    if (kind === 'resistor' && !(v > 0)) problems.push(`analyses.efficiency.loads[${i}]: a load resistance must be > 0 ohms, received ${v}`);
  });
  if (problems.length > 0) throw new InputError(where, problems);
  const variable = plant.control.kind === 'constant-on-time' || plant.control.kind === 'hysteretic';
  const { steps: _s, ...input } = plant.input;
  let prev: Float64Array | null = null;
  const points = loads.map((value, i): EfficiencyCurvePoint => {
    progress?.(i, loads.length);
    const load = kind === 'resistor' ? { kind: 'resistor' as const, ohms: value } : { kind: 'current' as const, amps: value };
    const p: StagePlant = { ...plant, input, load };
    const built = buildStagePlant(p, `${where} (analyses.efficiency.loads[${i}])`);
    const model = new CircuitModel(built.circuit);
    const sys: SwitchingSystem = { circuit: model, createController: () => built.createController()!, timeBaseS: built.periodS };
    const section: ShootingSection = variable ? { kind: 'gate-on', gate: built.stage.gates.main } : { kind: 'clock' };
    const start = prev !== null && prev.length === model.circuit.nx + model.circuit.nu ? prev.slice(0, model.circuit.nx) : undefined;
    const ss = periodicSteadyState(sys, { section, ...(start !== undefined ? { initialState: start, warmupPeriods: 1 } : {}) });
    const empty = { periodS: null, inputW: null, outputW: null, outputA: null, efficiency: null, efficiencyWithSwitching: null, conductionLossesW: null, switching: null, switchingW: null, balanceError: null };
    if (ss.status !== 'converged') return { load: value, status: 'not-converged', message: ss.message, ...empty };
    prev = ss.state;
    const loadIds = model.circuit.measurements.find((m) => m.name === built.stage.signals.loadCurrent)!.terms.map((t) => t.signal.slice(0, t.signal.indexOf('.')));
    let rep: EfficiencyReport;
    try {
      rep = steadyStateEfficiency(sys, ss, { inputs: ['VIN'], loads: loadIds });
    } catch (err) {
      throw new RunFailure(`efficiency at load ${value}: ${(err as Error).message}`);
    }
    let switching: SwitchingLossJson[] | null = null;
    let switchingW: number | null = null;
    if (scenario.switchingLosses !== undefined) {
      const acc = makeAccountant(model, scenario.switchingLosses, {}, where);
      const run = new Simulation(model, { stopS: ss.periodS, timeBaseS: sys.timeBaseS, controller: sys.createController(), initialState: ss.state, trace: acc }).run();
      if (run.status === 'failed') throw new RunFailure(`simulation failed (${run.error?.code ?? 'failed'}): ${run.message}`);
      switching = switchingWatts(acc.energies(), ss.periodS);
      switchingW = switching.reduce((a, x) => a + x.totalW, 0);
    }
    const vOut = Math.abs(rep.outputW) > 0 && kind === 'resistor' ? Math.sqrt(rep.outputW * value) : null;
    return {
      load: value,
      status: 'ok',
      message: '',
      periodS: ss.periodS,
      inputW: rep.inputW,
      outputW: rep.outputW,
      outputA: kind === 'current' ? value : vOut !== null ? vOut / value : null,
      efficiency: rep.outputW / rep.inputW,
      efficiencyWithSwitching: switchingW !== null ? rep.outputW / (rep.inputW + switchingW) : null,
      conductionLossesW: { ...rep.lossesW },
      switching,
      switchingW,
      balanceError: rep.balanceError,
    };
  });
  if (points.every((p) => p.status !== 'ok')) throw new RunFailure(`efficiency: no load point reached a periodic steady state (${points[0]!.message})`);
  return { loadKind: kind, loadUnit: kind === 'resistor' ? 'Ω' : 'A', points };
}
