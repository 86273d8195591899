/**
 * `edgewise efficiency FILE`: efficiency and loss breakdown of a stage plant over the loads
 * listed in "analyses.efficiency", each at its periodic steady state; summary JSON and an HTML
 * report with the efficiency curve.
 * @module
 */
import { optFlag, optValue, type ParsedArgs } from '../args.ts';
import { efficiencyCurve, type EfficiencyCurve } from '../analyses/efficiency.ts';
import { ensureDir, makeProgress, writeFileAtomic } from '../io.ts';
import { renderReport, type Section } from '../plot.ts';
import { buildPlan } from '../scenario/build.ts';
import { loadScenarioFile } from '../scenario/load.ts';
import { formatQuantity } from '../units.ts';
import { HELP, QUIET, say, scenarioArg, type Command } from './common.ts';

/** Report sections of an efficiency curve. */
export function efficiencySections(curve: EfficiencyCurve): Section[] {
  const ok = curve.points.filter((p) => p.status === 'ok');
  const x = ok.map((p) => p.load);
  const xLabel = curve.loadKind === 'resistor' ? 'load resistance' : 'load current';
  const withSw = ok.some((p) => p.efficiencyWithSwitching !== null);
  const parts = [...new Set(ok.flatMap((p) => Object.keys(p.conductionLossesW ?? {})))];
  const devices = [...new Set(ok.flatMap((p) => (p.switching ?? []).map((s) => s.device)))];
  return [{
    heading: 'Efficiency curve',
    charts: [
      {
        title: 'Efficiency', xLabel, xUnit: curve.loadUnit, yLabel: 'efficiency [%]',
        series: [
          { name: 'conduction losses (simulated)', x, y: ok.map((p) => 100 * p.efficiency!) },
          ...(withSw ? [{ name: 'with accounted switching losses', x, y: ok.map((p) => 100 * p.efficiencyWithSwitching!), dashed: true }] : []),
        ],
      },
      {
        title: 'Losses', xLabel, xUnit: curve.loadUnit, yLabel: 'loss', yUnit: 'W',
        series: [
          ...parts.map((e) => ({ name: `${e} conduction`, x, y: ok.map((p) => p.conductionLossesW![e] ?? 0) })),
          ...devices.map((d) => ({ name: `${d} switching`, x, y: ok.map((p) => p.switching!.find((s) => s.device === d)?.totalW ?? 0), dashed: true })),
        ],
      },
    ],
    table: {
      columns: ['load', 'input', 'output', 'efficiency', ...(withSw ? ['with switching'] : []), 'status'],
      rows: curve.points.map((p) => [
        formatQuantity(p.load, curve.loadUnit, 5),
        p.inputW === null ? '' : formatQuantity(p.inputW, 'W', 5),
        p.outputW === null ? '' : formatQuantity(p.outputW, 'W', 5),
        p.efficiency === null ? '' : `${(100 * p.efficiency).toFixed(3)} %`,
        ...(withSw ? [p.efficiencyWithSwitching === null ? '' : `${(100 * p.efficiencyWithSwitching).toFixed(3)} %`] : []),
        p.status === 'ok' ? 'ok' : `${p.status}: ${p.message}`,
      ]),
    },
    notes: ['Each point at its periodic steady state (shooting); powers are exact integrals over one period. Switching losses are accounted per transition and not fed back into the circuit.'],
  }];
}

export const efficiencyCommand: Command = {
  name: 'efficiency',
  summary: 'efficiency and loss breakdown of a stage over a list of loads, each at its periodic steady state',
  usage: 'edgewise efficiency FILE [--summary FILE.json|-] [--report FILE.html] [--quiet]',
  details: [
    'Loads come from the scenario\'s "analyses.efficiency.loads" (ohms for a resistive load, amperes',
    'for a current load). With "switchingLosses" in the scenario, each point also gives the accounted',
    'switching losses and the efficiency including them.',
  ].join('\n'),
  options: [
    { name: 'summary', value: 'FILE', help: 'summary JSON file, or - for standard output (default -)' },
    { name: 'report', value: 'FILE', help: 'HTML report with the efficiency and loss curves' },
    QUIET,
    HELP,
  ],
  example: 'edgewise efficiency examples/boost-efficiency.json --report out/efficiency.html',
  async run(args: ParsedArgs) {
    const file = scenarioArg(args, 'efficiency');
    const quiet = optFlag(args, 'quiet');
    const { scenario } = loadScenarioFile(file);
    const plan = buildPlan(scenario, file);
    const progress = makeProgress('efficiency', quiet);
    let curve;
    try {
      curve = efficiencyCurve(plan, file, (done, total) => progress?.update(done / total, `${done}/${total} loads`));
    } finally {
      progress?.done();
    }
    const summary = optValue(args, 'summary') ?? '-';
    const report = optValue(args, 'report');
    const json = `${JSON.stringify({ scenario: plan.name, analysis: 'efficiency', ...curve }, null, 2)}\n`;
    const html = report === undefined ? undefined : renderReport({
      title: `edgewise: ${plan.name}: efficiency`,
      ...(scenario.description !== undefined ? { subtitle: scenario.description } : {}),
      sections: efficiencySections(curve),
    });
    if (summary === '-') process.stdout.write(json);
    else {
      ensureDir(summary);
      writeFileAtomic(summary, json);
    }
    if (report !== undefined && html !== undefined) {
      ensureDir(report);
      writeFileAtomic(report, html);
    }
    const ok = curve.points.filter((p) => p.status === 'ok').length;
    say(quiet, `efficiency: ${ok} of ${curve.points.length} loads at steady state${[summary, report].filter((x) => x !== undefined && x !== '-').map((x) => `; wrote ${x}`).join('')}`);
    return 0;
  },
};
