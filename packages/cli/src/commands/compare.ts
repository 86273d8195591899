/**
 * `edgewise compare FILE`: the CCM averaged model against the switching circuit of an
 * open-loop stage (DC point, ripple, frequency response, load step); summary JSON and an HTML
 * report with Bode plots.
 * @module
 */
import { optFlag, optValue, type ParsedArgs } from '../args.ts';
import { compareAveragedModel, compareJson } from '../analyses/compare.ts';
import { compareSections } from '../analyses/compare-report.ts';
import { ensureDir, writeFileAtomic } from '../io.ts';
import { renderReport } from '../plot.ts';
import { buildPlan } from '../scenario/build.ts';
import { loadScenarioFile } from '../scenario/load.ts';
import { HELP, QUIET, say, scenarioArg, type Command } from './common.ts';

export const compareCommand: Command = {
  name: 'compare',
  summary: 'averaged model versus switching circuit of an open-loop or peak-current stage: DC point, ripple, frequency response, load step',
  usage: 'edgewise compare FILE [--summary FILE.json|-] [--report FILE.html] [--quiet]',
  details: [
    'Settings come from the scenario\'s "analyses.compare": input ("duty", "line" or "load-current"),',
    'output signal, frequencies (a list, or fromHz/toHz/points on a log scale; default fs/1000 to',
    'fs/5, 40 points) and loadStep ({ "amps": ..., "cycles": ... }). The plant must be a stage with',
    'open-loop control (CCM or DCM) or peak-current control with a fixed command. Both outputs are written only when everything succeeded.',
  ].join('\n'),
  options: [
    { name: 'summary', value: 'FILE', help: 'summary JSON file, or - for standard output (default -)' },
    { name: 'report', value: 'FILE', help: 'HTML report with Bode plots and the load step' },
    QUIET,
    HELP,
  ],
  example: 'edgewise compare examples/buck-compare.json --report out/compare.html',
  async run(args: ParsedArgs) {
    const file = scenarioArg(args, 'compare');
    const quiet = optFlag(args, 'quiet');
    const { scenario } = loadScenarioFile(file);
    const plan = buildPlan(scenario, file);
    const result = compareAveragedModel(plan, file);
    const summary = optValue(args, 'summary') ?? '-';
    const report = optValue(args, 'report');
    const json = `${JSON.stringify(compareJson(result, plan.name), null, 2)}\n`;
    const html = report !== undefined
      ? renderReport({
          title: `edgewise: ${plan.name}: averaged model vs switching circuit`,
          ...(scenario.description !== undefined ? { subtitle: scenario.description } : {}),
          sections: compareSections(result),
        })
      : undefined;
    if (summary === '-') process.stdout.write(json);
    else {
      ensureDir(summary);
      writeFileAtomic(summary, json);
    }
    if (report !== undefined && html !== undefined) {
      ensureDir(report);
      writeFileAtomic(report, html);
    }
    const fr = result.points.reduce((m, p) => Math.max(m, Math.abs(p.errorDb)), 0);
    const fp = result.points.reduce((m, p) => Math.max(m, Math.abs(p.errorDeg)), 0);
    say(quiet, `compare: ${result.points.length} frequencies, largest error ${fr.toPrecision(3)} dB and ${fp.toPrecision(3)} deg${result.warnings.length > 0 ? `; ${result.warnings.join('; ')}` : ''}${[summary, report].filter((x) => x !== undefined && x !== '-').map((x) => `; wrote ${x}`).join('')}`);
    return 0;
  },
};
