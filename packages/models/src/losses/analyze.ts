import {
  CircuitModel,
  Simulation,
  SimulationError,
  type Controller,
  type EngineSettings,
  type IntegralSpec,
  type RunResult,
} from '@edgewise/engine';
import type { ClosedStage } from '../stage.ts';
import { conductionTerms, type ConductionPart } from './conduction.ts';
import { LossAccountant, type SwitchingEnergy } from './accountant.ts';
import type { SwitchingLossModels } from './switching.ts';

/** Options of {@link analyzeLosses}. */
export interface LossAnalysisOptions {
  /** Start of the averaging window, seconds (>= 0; let the start-up transient settle first). */
  readonly fromS: number;
  /** End of the window and of the run, seconds (> fromS; whole switching periods are best). */
  readonly toS: number;
  /** Switching-loss data by element id (default none: conduction losses only). */
  readonly switching?: SwitchingLossModels;
  /** Initial state by state or input name (default from the circuit). */
  readonly initialState?: Readonly<Record<string, number>>;
  readonly settings?: EngineSettings;
}

/** Where a conduction loss is dissipated. */


/** Average conduction loss of one element part over the window, watts. */
export interface ConductionLoss {
  readonly element: string;
  readonly part: ConductionPart;
  readonly watts: number;
}

/** Average switching loss of one device over the window, watts, with transition counts. */
export interface SwitchingLoss {
  readonly device: string;
  readonly turnOnW: number;
  readonly turnOffW: number;
  readonly outputCapacitanceW: number;
  readonly reverseRecoveryW: number;
  readonly gateDriveW: number;
  readonly totalW: number;
  readonly turnOns: number;
  readonly turnOffs: number;
  readonly recoveries: number;
}

/** Switching energies accounted over a window of `spanS` seconds, as average powers. */
export function switchingPowers(energies: readonly SwitchingEnergy[], spanS: number): SwitchingLoss[] {
  return energies.map((e) => ({
    device: e.device,
    turnOnW: e.turnOnJ / spanS,
    turnOffW: e.turnOffJ / spanS,
    outputCapacitanceW: e.outputCapacitanceJ / spanS,
    reverseRecoveryW: e.reverseRecoveryJ / spanS,
    gateDriveW: e.gateDriveJ / spanS,
    totalW: e.totalJ / spanS,
    turnOns: e.turnOns,
    turnOffs: e.turnOffs,
    recoveries: e.recoveries,
  }));
}

/** Loss breakdown averaged over a window. */
export interface LossReport {
  readonly fromS: number;
  readonly toS: number;
  /** Average power delivered by the input source at its terminals, watts (from the simulation). */
  readonly inputPowerW: number;
  /** Average load power, watts (from the simulation). */
  readonly outputPowerW: number;
  /** Change of the energy stored in inductors and capacitors over the window, divided by its length, watts. */
  readonly storedPowerW: number;
  /** Conduction losses from the simulation itself (exact integrals), per element part. */
  readonly conduction: readonly ConductionLoss[];
  /** Accounted switching losses per device (not fed back into the circuit). */
  readonly switching: readonly SwitchingLoss[];
  readonly conductionW: number;
  readonly switchingW: number;
  readonly totalLossW: number;
  /**
   * Estimated efficiency Pout / (Pin + Psw): the simulated input power plus the accounted
   * switching losses, which a real converter would also draw (they are not in the simulation).
   */
  readonly efficiency: number;
  /** Efficiency of the simulated circuit alone, Pout / Pin (conduction losses only). */
  readonly conductionEfficiency: number;
  /**
   * Energy-balance residual Pin - Pout - conduction - stored, watts: zero up to rounding
   * because every term is an exact integral (a check of the run, not a loss).
   */
  readonly balanceResidualW: number;
  /** Run counters, for diagnostics. */
  readonly run: RunResult;
}

/** Timer tag of the window start; controllers use integer tags. */
const WINDOW_TAG = -0.5;

interface Entry {
  readonly element: string;
  readonly part: ConductionPart;
  readonly scale: number;
  readonly integral: string;
}

/** Element ids behind a current signal (a `<id>.current` name, or a measurement of such terms). */
function elementsOf(model: CircuitModel, signal: string): Set<string> {
  const out = new Set<string>();
  const c = model.circuit;
  const visit = (name: string, depth: number): void => {
    const m = c.measurements.find((x) => x.name === name);
    if (m !== undefined && depth < 8) {
      for (const t of m.terms) visit(t.signal, depth + 1);
      return;
    }
    const dot = name.indexOf('.');
    if (dot > 0) out.add(name.slice(0, dot));
  };
  visit(signal, 0);
  return out;
}

/**
 * Runs a closed stage to `toS` and returns the loss breakdown averaged over [fromS, toS]:
 * conduction losses come out of the simulation itself as exact integrals (device voltage
 * times current for switch channels, body diodes and diodes; R i^2 for inductor windings and
 * capacitor ESRs; v i for resistors other than the load); switching losses are accounted per
 * transition by a {@link LossAccountant} and are not fed back into the circuit. Elements that
 * carry the load current (by the stage's load-current signal) count as output, and the input
 * source's own series resistance lies outside the input terminals.
 *
 * @throws SimulationError when the run does not reach `toS`; RangeError for a bad window.
 */
export function analyzeLosses(closed: ClosedStage, options: LossAnalysisOptions): LossReport {
  const { fromS, toS } = options;
  if (!(typeof fromS === 'number' && Number.isFinite(fromS) && fromS >= 0)) throw new RangeError(`fromS must be a time >= 0 s, got ${String(fromS)}`);
  if (!(typeof toS === 'number' && Number.isFinite(toS) && toS > fromS)) throw new RangeError(`toS must be a time > fromS (${fromS} s), got ${String(toS)}`);
  const model = new CircuitModel(closed.circuit);
  const c = model.circuit;
  const sig = closed.stage.signals;
  const load = elementsOf(model, sig.loadCurrent);
  const entries: Entry[] = [];
  const integrals: IntegralSpec[] = [
    { name: 'pin', of: sig.inputVoltage, times: sig.inputCurrent },
    { name: 'pout', of: sig.outputVoltage, times: sig.loadCurrent },
  ];
  for (const t of conductionTerms(c.spec, load)) {
    const name = `${t.element}#${t.part}`;
    integrals.push({ name, of: t.of, times: t.times });
    entries.push({ element: t.element, part: t.part, scale: t.scale, integral: name });
  }
  const accountant = new LossAccountant(model, options.switching ?? {}, { fromS, toS });
  const inner = closed.createController();
  const controller: Controller = {
    start(ctx) {
      inner.start(ctx);
      // an event exactly at the window start, so the integrals can be read there
      const k = Math.floor(fromS / ctx.timeBaseS);
      ctx.at(WINDOW_TAG, k, fromS - k * ctx.timeBaseS);
    },
    onEvent(ctx, tag) {
      if (tag !== WINDOW_TAG) inner.onEvent(ctx, tag);
    },
  };
  const sim = new Simulation(model, {
    stopS: toS,
    timeBaseS: closed.timeBaseS,
    controller,
    integrals,
    trace: accountant,
    ...(options.initialState ? { initialState: options.initialState } : {}),
    ...(options.settings ? { settings: options.settings } : {}),
  });
  while (sim.status === 'running' && sim.timeS < fromS) sim.step();
  const r0 = sim.result();
  const run = sim.run();
  if (run.status !== 'finished') {
    throw run.error ?? new SimulationError('controller', `loss analysis: the run ${run.status} at t = ${run.timeS} s before the window end ${toS} s: ${run.message}`, [], run.timeS);
  }
  const T = toS - fromS;
  const mean = (name: string): number => (run.integrals[name]! - r0.integrals[name]!) / T;
  let stored = 0;
  for (const e of c.spec.elements) {
    if (e.kind === 'inductor') {
      const k = c.stateNames.indexOf(`${e.id}.current`);
      stored += 0.5 * e.henries * (run.state[k]! ** 2 - r0.state[k]! ** 2);
    } else if (e.kind === 'capacitor') {
      const k = c.stateNames.indexOf(`${e.id}.charge`);
      stored += 0.5 * e.farads * (run.state[k]! ** 2 - r0.state[k]! ** 2);
    }
  }
  const conduction = entries.map((en) => ({ element: en.element, part: en.part, watts: en.scale * mean(en.integral) }));
  const switching = switchingPowers(accountant.energies(), T);
  const pin = mean('pin');
  const pout = mean('pout');
  const conductionW = conduction.reduce((a, x) => a + x.watts, 0);
  const switchingW = switching.reduce((a, x) => a + x.totalW, 0);
  const storedPowerW = stored / T;
  return {
    fromS, toS,
    inputPowerW: pin,
    outputPowerW: pout,
    storedPowerW,
    conduction,
    switching,
    conductionW,
    switchingW,
    totalLossW: conductionW + switchingW,
    efficiency: pout / (pin + switchingW),
    conductionEfficiency: pout / pin,
    balanceResidualW: pin - pout - conductionW - storedPowerW,
    run,
  };
}
