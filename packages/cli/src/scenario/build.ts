/**
 * Turns a validated scenario into a run plan: the engine circuit, a controller factory, the
 * time base and the run options, with every name checked (bad names are InputErrors that
 * give the JSON path and list the known names).
 * @module
 */
import { CircuitError, CircuitModel, type CircuitSpec, type Controller, type SignalInfo } from '@edgewise/engine';
import type { Stage } from '@edgewise/models';
import { InputError } from '../errors.ts';
import { createPwmDrive } from '../drive.ts';
import type { CircuitPlant, Scenario } from './schema.ts';
import { buildStagePlant } from './build-stage.ts';
import { makeAccountant } from '../analyses/losses.ts';

/** A measured power: gain * v * i, averaged over the window. */
export interface PowerSpec {
  readonly name: string;
  readonly voltage: string;
  readonly current: string;
  readonly gain: number;
}

/** Everything needed to run a scenario. */
export interface Plan {
  readonly name: string;
  readonly circuit: CircuitSpec;
  readonly model: CircuitModel;
  /** Makes a fresh controller for one run (undefined: no controller). */
  readonly createController: () => Controller | undefined;
  /** Switching period, seconds, when the plant has one. */
  readonly periodS: number | undefined;
  readonly timeBaseS: number;
  readonly stopS: number;
  /** Start of the recorded window and summary metrics, seconds. */
  readonly fromS: number;
  readonly gridS: number | undefined;
  readonly record: readonly string[];
  readonly units: readonly string[];
  readonly recordEvents: boolean;
  readonly exactAverages: boolean;
  readonly initial: Readonly<Record<string, number>> | undefined;
  readonly powers: readonly PowerSpec[];
  readonly efficiency: { readonly input: readonly string[]; readonly output: readonly string[] } | undefined;
  /** Gate of the main switch (for the switching frequency), when known. */
  readonly mainGate: string | undefined;
  /** The stage and its parameters, for stage plants (analyses need them). */
  readonly stage: Stage | undefined;
  /** Elements left out of the conduction-loss breakdown: loads and elements whose power is measured. */
  readonly lossExclude: ReadonlySet<string>;
  readonly scenario: Scenario;
}

/** Unit of a signal for CSV headers and plots ('' when dimensionless). */
export function unitOf(info: SignalInfo | undefined): string {
  return info === undefined || info.unit === '1' ? '' : info.unit;
}

function compile(circuit: CircuitSpec, elementPath: (id: string) => string, where: string): CircuitModel {
  try {
    return new CircuitModel(circuit);
  } catch (err) {
    if (err instanceof CircuitError) {
      throw new InputError(where, err.issues.map((i) => `${elementPath(i.element)}: ${i.message}`));
    }
    throw new InputError(where, [`plant: ${(err as Error).message}`]);
  }
}

function rawCircuit(plant: CircuitPlant): CircuitSpec {
  // The schema's output has exactly the engine's field names; drop the scenario-only field.
  const { kind: _kind, drive: _drive, ...spec } = plant;
  return spec as CircuitSpec;
}

/** Builds the run plan of a scenario; throws InputError naming the JSON path on bad names. */
export function buildPlan(scenario: Scenario, where: string): Plan {
  const plant = scenario.plant;
  let circuit: CircuitSpec;
  let model: CircuitModel;
  let createController: () => Controller | undefined;
  let periodS: number | undefined;
  let stage: Stage | undefined;
  if (plant.kind === 'circuit') {
    circuit = rawCircuit(plant);
    const index = new Map(plant.elements.map((e, i) => [e.id, i]));
    const blockIndex = new Map((plant.blocks ?? []).map((b, i) => [b.id, i]));
    model = compile(circuit, (id) => {
      const i = index.get(id);
      if (i !== undefined) return `plant.elements[${i}] (${id})`;
      const b = blockIndex.get(id);
      return b !== undefined ? `plant.blocks[${b}] (${id})` : `plant (${id})`;
    }, where);
    const drive = plant.drive;
    if (drive !== undefined) {
      const gates = model.circuit.gates;
      const problems: string[] = [];
      const known = `known gates: ${gates.join(', ') || '(none)'}`;
      if (!gates.includes(drive.main)) problems.push(`plant.drive.main: unknown gate "${drive.main}"; ${known}`);
      if (drive.complement !== undefined && !gates.includes(drive.complement)) problems.push(`plant.drive.complement: unknown gate "${drive.complement}"; ${known}`);
      if (drive.complement === drive.main) problems.push('plant.drive.complement: must differ from plant.drive.main');
      const p = 1 / drive.frequency;
      if ((drive.deadTime ?? 0) * 2 >= p) problems.push('plant.drive.deadTime: two dead times must be shorter than the period');
      if (problems.length > 0) throw new InputError(where, problems);
      periodS = p;
      const settings = {
        periodS: p,
        duty: drive.duty,
        main: drive.main,
        ...(drive.complement !== undefined ? { complement: drive.complement } : {}),
        ...(drive.deadTime !== undefined ? { deadTimeS: drive.deadTime } : {}),
        ...(drive.dutySteps !== undefined ? { dutySteps: drive.dutySteps.map((d) => ({ atS: d.atS, duty: d.duty })) } : {}),
      };
      createController = () => createPwmDrive(settings);
    } else {
      createController = () => undefined;
    }
  } else {
    const built = buildStagePlant(plant, where);
    circuit = built.circuit;
    model = compile(circuit, (id) => `plant (element ${id})`, where);
    createController = built.createController;
    periodS = built.periodS;
    stage = built.stage;
  }

  const run = scenario.run;
  const problems: string[] = [];
  if (run.cycles !== undefined && periodS === undefined) problems.push('run.cycles: the plant has no switching period (add plant.drive or give run.stop)');
  if (run.fromCycle !== undefined && periodS === undefined) problems.push('run.fromCycle: the plant has no switching period (use run.from)');
  if (run.pointsPerCycle !== undefined && periodS === undefined) problems.push('run.pointsPerCycle: the plant has no switching period (use run.grid)');
  if (problems.length > 0) throw new InputError(where, problems);
  const stopS = run.stop ?? run.cycles! * periodS!;
  const fromS = run.from ?? (run.fromCycle !== undefined ? run.fromCycle * periodS! : 0);
  if (fromS >= stopS) throw new InputError(where, [`run.${run.from !== undefined ? 'from' : 'fromCycle'}: the window starts at ${fromS} s, not before the stop time ${stopS} s`]);
  const gridS = run.grid ?? (run.pointsPerCycle !== undefined ? periodS! / run.pointsPerCycle : undefined);

  const signals = model.listSignals();
  const byName = new Map(signals.map((s) => [s.name, s]));
  const knownList = (): string => {
    const names = signals.map((s) => s.name);
    return names.length > 40 ? `${names.slice(0, 40).join(', ')}, ... (${names.length} in all; see \`edgewise check\`)` : names.join(', ');
  };
  const checkSignal = (name: string, path: string): void => {
    if (!byName.has(name)) problems.push(`${path}: unknown signal "${name}"; known signals: ${knownList()}`);
  };
  const record = run.record ?? defaultRecord(model, stage);
  if (run.record !== undefined) run.record.forEach((s, i) => checkSignal(s, `run.record[${i}]`));
  const powers: PowerSpec[] = (run.powers ?? []).map((p, i) => {
    checkSignal(p.voltage, `run.powers[${i}].voltage`);
    checkSignal(p.current, `run.powers[${i}].current`);
    return { name: p.name, voltage: p.voltage, current: p.current, gain: p.gain ?? 1 };
  });
  const powerNames = new Set(powers.map((p) => p.name));
  if (run.efficiency !== undefined) {
    for (const side of ['input', 'output'] as const) {
      run.efficiency[side].forEach((n, i) => {
        if (!powerNames.has(n)) problems.push(`run.efficiency.${side}[${i}]: unknown power "${n}"; powers: ${[...powerNames].join(', ') || '(none: add run.powers)'}`);
      });
    }
  }
  (scenario.plots ?? []).forEach((p, i) => p.signals.forEach((s, j) => checkSignal(s, `plots[${i}].signals[${j}]`)));
  if (run.initial !== undefined) {
    const states = model.circuit.stateNames;
    for (const k of Object.keys(run.initial)) {
      if (!states.includes(k) && !states.includes(`${k}.charge`) && !states.includes(`${k}.current`)) {
        problems.push(`run.initial.${k}: unknown state; states: ${states.join(', ')}`);
      }
    }
  }
  if (problems.length > 0) throw new InputError(where, problems);
  // validates the switching-loss data against the circuit's switches and diodes
  if (scenario.switchingLosses !== undefined) makeAccountant(model, scenario.switchingLosses, {}, where);
  const lossExclude = new Set<string>();
  for (const p of powers) lossExclude.add(p.current.slice(0, Math.max(0, p.current.indexOf('.'))));
  if (stage !== undefined) {
    for (const m of model.circuit.measurements) {
      if (m.name === stage.signals.loadCurrent) for (const t of m.terms) lossExclude.add(t.signal.slice(0, t.signal.indexOf('.')));
    }
  }
  lossExclude.delete('');

  return {
    name: scenario.name ?? 'scenario',
    circuit,
    model,
    createController,
    periodS,
    timeBaseS: periodS ?? stopS,
    stopS,
    fromS,
    gridS,
    record,
    units: record.map((s) => unitOf(byName.get(s))),
    recordEvents: run.events ?? true,
    exactAverages: run.exactAverages ?? true,
    initial: run.initial,
    powers,
    efficiency: run.efficiency,
    mainGate: stage !== undefined ? stage.gates.main : plant.kind === 'circuit' ? plant.drive?.main : undefined,
    stage,
    lossExclude,
    scenario,
  };
}

/** Default recorded signals: the stage's main signals, or node voltages and inductor currents. */
function defaultRecord(model: CircuitModel, stage: Stage | undefined): string[] {
  if (stage !== undefined) {
    const s = stage.signals;
    return [...new Set([s.inductorCurrent, s.outputVoltage, s.switchNode, s.inputCurrent])];
  }
  const out: string[] = [];
  const nodes = new Set(model.circuit.nodes);
  for (const info of model.listSignals()) if (nodes.has(info.name)) out.push(info.name);
  for (const e of model.circuit.spec.elements) if (e.kind === 'inductor') out.push(`${e.id}.current`);
  return out;
}
