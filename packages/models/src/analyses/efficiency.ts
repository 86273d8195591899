/**
 * Efficiency and loss breakdown at the periodic steady state, from exact integrals over one
 * period: power delivered by the input sources, power absorbed by the loads, and the loss of
 * every other dissipating part (resistors, winding and series resistances, switches, diodes).
 * Only conduction losses come out of the circuit (transitions are instantaneous); switching
 * losses computed elsewhere (e.g. the loss models' accountant) can be passed in and are
 * accounted, not fed back into the circuit.
 */
import { CircuitModel, simulate, type IntegralSpec } from '@edgewise/engine';
import { periodicSteadyState, type ShootingOptions, type SteadyState } from './shooting.ts';
import { modelOf, type SwitchingSystem } from './trace.ts';

/** Options of {@link steadyStateEfficiency}. */
export interface EfficiencyOptions {
  /** Ids of the sources whose delivered power is the input power (e.g. ["VIN"]). */
  readonly inputs: readonly string[];
  /** Ids of the elements whose absorbed power is the output power (a load resistor or current source). */
  readonly loads: readonly string[];
  /** Switching (or other) losses computed outside the circuit, watts by name; added to the input power. */
  readonly extraLossesW?: Readonly<Record<string, number>>;
}

/** Efficiency and losses at steady state; powers in watts, averaged over one period. */
export interface EfficiencyReport {
  readonly inputW: number;
  readonly outputW: number;
  /** Conduction loss per element id (inductor and capacitor entries are their series resistances). */
  readonly lossesW: Readonly<Record<string, number>>;
  /** The extra losses passed in. */
  readonly extraLossesW: Readonly<Record<string, number>>;
  /** outputW / (inputW + sum of extra losses). */
  readonly efficiency: number;
  /** (inputW - outputW - conduction losses - stored-energy change / T) / inputW: the balance check (~1e-12). */
  readonly balanceError: number;
}

/** Power balance over one period from the steady state `ss`. */
export function steadyStateEfficiency(sys: SwitchingSystem, ss: SteadyState, options: EfficiencyOptions): EfficiencyReport {
  const model = modelOf(sys);
  const spec = model.circuit.spec;
  const byId = new Map(spec.elements.map((e) => [e.id, e]));
  if (!Array.isArray(options?.inputs) || options.inputs.length === 0) throw new RangeError('inputs must name at least one source');
  if (!Array.isArray(options.loads) || options.loads.length === 0) throw new RangeError('loads must name at least one element');
  for (const id of options.inputs) {
    const e = byId.get(id);
    if (e === undefined || (e.kind !== 'voltage-source' && e.kind !== 'current-source')) throw new RangeError(`inputs: "${id}" is not an independent source of the circuit`);
  }
  for (const id of options.loads) if (!byId.has(id)) throw new RangeError(`loads: unknown element "${id}"`);
  const extra = options.extraLossesW ?? {};
  for (const [k, v] of Object.entries(extra)) if (!Number.isFinite(v)) throw new RangeError(`extraLossesW.${k} must be a finite number of watts, got ${String(v)}`);
  const ints: IntegralSpec[] = [];
  const lossOhms = new Map<string, number>();
  for (const e of spec.elements) {
    const vi = { name: `vi:${e.id}`, of: `${e.id}.voltage`, times: `${e.id}.current` };
    if (options.inputs.includes(e.id) || options.loads.includes(e.id)) ints.push(vi);
    else if (e.kind === 'resistor' || e.kind === 'switch' || e.kind === 'diode') ints.push(vi);
    else if ((e.kind === 'inductor' && (e.seriesOhms ?? 0) > 0) || (e.kind === 'capacitor' && (e.esrOhms ?? 0) > 0) || (e.kind === 'voltage-source' && (e.seriesOhms ?? 0) > 0)) {
      lossOhms.set(e.id, e.kind === 'inductor' ? e.seriesOhms! : e.kind === 'capacitor' ? e.esrOhms! : e.seriesOhms!);
      ints.push({ name: `ii:${e.id}`, of: `${e.id}.current`, times: `${e.id}.current` });
    }
  }
  const T = ss.periodS;
  const run = simulate(model, { stopS: T, timeBaseS: sys.timeBaseS, controller: sys.createController(), initialState: ss.state, integrals: ints });
  if (run.status === 'failed') throw new Error(`efficiency: the steady-state period failed: ${run.message}`);
  const I = run.integrals;
  let pin = 0, pout = 0;
  // a source absorbs v i with its current counted pos -> neg through it: it delivers -v i
  for (const id of options.inputs) pin -= I[`vi:${id}`]! / T;
  for (const id of options.loads) pout += I[`vi:${id}`]! / T;
  const losses: Record<string, number> = {};
  let lossSum = 0;
  for (const e of spec.elements) {
    if (options.inputs.includes(e.id) || options.loads.includes(e.id)) continue;
    let p: number | undefined;
    const vi = I[`vi:${e.id}`];
    if (vi !== undefined) p = vi / T;
    const ii = I[`ii:${e.id}`];
    if (ii !== undefined) p = (ii * lossOhms.get(e.id)!) / T;
    if (p === undefined) continue;
    losses[e.id] = p;
    lossSum += p;
  }
  // energy stored in inductors and capacitors changes by the shooting residual only
  let dE = 0;
  const names = model.circuit.stateNames;
  for (const e of spec.elements) {
    if (e.kind === 'inductor') {
      const i = names.indexOf(`${e.id}.current`);
      dE += 0.5 * e.henries * (run.state[i]! ** 2 - ss.state[i]! ** 2);
    } else if (e.kind === 'capacitor') {
      const i = names.indexOf(`${e.id}.charge`);
      dE += 0.5 * e.farads * (run.state[i]! ** 2 - ss.state[i]! ** 2);
    }
  }
  const extraSum = Object.values(extra).reduce((a, b) => a + b, 0);
  return {
    inputW: pin,
    outputW: pout,
    lossesW: losses,
    extraLossesW: { ...extra },
    efficiency: pout / (pin + extraSum),
    balanceError: (pin - pout - lossSum - dE / T) / pin,
  };
}

/** One point of an efficiency sweep. */
export interface EfficiencyPoint {
  /** The swept value given. */
  readonly value: number;
  readonly report: EfficiencyReport | null;
  /** Steady-state period, seconds (null when shooting failed). */
  readonly periodS: number | null;
  /** Why the point has no report (shooting did not converge), else empty. */
  readonly message: string;
}

/**
 * Efficiency versus a swept value (usually the load) in one call: `build(value)` makes the
 * system for each value; each point is shot to its periodic steady state, starting from the
 * previous point's state when the state layout allows (continuation), then measured.
 */
export function efficiencySweep(
  build: (value: number) => SwitchingSystem,
  values: readonly number[],
  options: EfficiencyOptions & { readonly shooting?: ShootingOptions },
): EfficiencyPoint[] {
  if (!Array.isArray(values) || values.length === 0) throw new RangeError('values must list at least one value');
  let prev: Float64Array | null = null;
  return values.map((value) => {
    if (!Number.isFinite(value)) throw new RangeError(`values must be finite numbers, got ${String(value)}`);
    const sys = build(value);
    const model = sys.circuit instanceof CircuitModel ? sys.circuit : new CircuitModel(sys.circuit);
    const msys: SwitchingSystem = { ...sys, circuit: model };
    const n = model.circuit.nx + model.circuit.nu;
    const start = prev !== null && prev.length === n ? prev.slice(0, model.circuit.nx) : undefined;
    const ss = periodicSteadyState(msys, { ...(options.shooting ?? {}), ...(start ? { initialState: start, warmupPeriods: options.shooting?.warmupPeriods ?? 1 } : {}) });
    if (ss.status !== 'converged') return { value, report: null, periodS: null, message: ss.message };
    prev = ss.state;
    return { value, report: steadyStateEfficiency(msys, ss, options), periodS: ss.periodS, message: '' };
  });
}
