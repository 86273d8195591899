/**
 * `edgewise check FILE`: validate a scenario and describe it without running it.
 * @module
 */
import { describeKey } from '@edgewise/engine';
import { optFlag, type ParsedArgs } from '../args.ts';
import { buildPlan, unitOf, type Plan } from '../scenario/build.ts';
import { loadScenarioFile } from '../scenario/load.ts';
import { formatQuantity } from '../units.ts';
import { HELP, QUIET, scenarioArg, type Command } from './common.ts';

/** Machine-readable description of a plan. */
export function describePlan(plan: Plan): Record<string, unknown> {
  const c = plan.model.circuit;
  return {
    name: plan.name,
    plant: plan.scenario.plant.kind,
    elements: c.spec.elements.length,
    nodes: [c.ground, ...c.nodes],
    states: c.stateNames,
    inputs: c.inputNames.slice(1),
    devices: c.devices.map((d) => ({ id: d.id, kind: d.kind, ...(d.gate >= 0 ? { gate: c.gates[d.gate] } : {}) })),
    gates: c.gates,
    topologies: {
      possible: 2 ** c.devices.length,
      initial: describeKey(c, 0) || '(no switching devices)',
    },
    signals: plan.model.listSignals().map((s) => ({ name: s.name, unit: unitOf(s), description: s.description })),
    run: {
      stopS: plan.stopS,
      fromS: plan.fromS,
      ...(plan.periodS !== undefined ? { periodS: plan.periodS, cycles: plan.stopS / plan.periodS } : {}),
      ...(plan.gridS !== undefined ? { gridS: plan.gridS } : {}),
      record: plan.record,
    },
  };
}

function text(plan: Plan, file: string): string {
  const d = describePlan(plan) as {
    states: string[]; devices: { id: string; kind: string; gate?: string }[]; gates: string[];
    nodes: string[]; signals: { name: string; unit: string; description: string }[];
  };
  const c = plan.model.circuit;
  const lines = [
    `${file}: valid scenario "${plan.name}" (${plan.scenario.plant.kind} plant)`,
    `  elements: ${c.spec.elements.length}; nodes: ${d.nodes.join(', ')} (ground ${c.ground})`,
    `  states (${d.states.length}): ${d.states.join(', ') || '(none)'}`,
    `  switching devices (${d.devices.length}): ${d.devices.map((x) => `${x.id} [${x.kind}${x.gate !== undefined ? `, gate ${x.gate}` : ''}]`).join(', ') || '(none)'}`,
    `  topologies: up to ${2 ** c.devices.length} (conduction states of the devices; built lazily as reached)`,
    `  gates: ${d.gates.join(', ') || '(none)'}`,
    `  run: stop ${formatQuantity(plan.stopS, 's')}, window from ${formatQuantity(plan.fromS, 's')}` +
      (plan.periodS !== undefined ? `, period ${formatQuantity(plan.periodS, 's')} (${Math.round(plan.stopS / plan.periodS)} cycles)` : '') +
      (plan.gridS !== undefined ? `, grid ${formatQuantity(plan.gridS, 's')}` : ', event points only'),
    `  recorded: ${plan.record.join(', ')}`,
    `  signals (${d.signals.length}):`,
    ...d.signals.map((s) => `    ${s.name}${s.unit !== '' ? ` [${s.unit}]` : ''}  ${s.description}`),
  ];
  return `${lines.join('\n')}\n`;
}

export const checkCommand: Command = {
  name: 'check',
  summary: 'validate a scenario and describe it (states, devices, topologies, signals) without running it',
  usage: 'edgewise check FILE [--json] [--quiet]',
  options: [{ name: 'json', help: 'print the description as JSON' }, QUIET, HELP],
  example: 'edgewise check examples/pol-buck.json',
  async run(args: ParsedArgs) {
    const file = scenarioArg(args, 'check');
    const { scenario } = loadScenarioFile(file);
    const plan = buildPlan(scenario, file);
    if (optFlag(args, 'json')) process.stdout.write(`${JSON.stringify(describePlan(plan), null, 2)}\n`);
    else if (!optFlag(args, 'quiet')) process.stdout.write(text(plan, file));
    return 0;
  },
};
