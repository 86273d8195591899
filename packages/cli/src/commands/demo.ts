/**
 * `edgewise demo`: runs the example point-of-load scenario and writes CSV, summary JSON and
 * the HTML report under out/demo/.
 * @module
 */
import { fileURLToPath } from 'node:url';
import { join, resolve } from 'node:path';
import { optFlag, optValue, type ParsedArgs } from '../args.ts';
import { buildPlan } from '../scenario/build.ts';
import { loadScenarioFile } from '../scenario/load.ts';
import { formatQuantity } from '../units.ts';
import { HELP, QUIET, say, type Command } from './common.ts';
import { executeRun } from './run.ts';

/** The example scenario shipped in examples/. */
export const DEMO_SCENARIO = fileURLToPath(
  // this file sits in packages/cli/src/commands; the bundle (scripts/build-cli.mjs) in packages/cli/dist
  new URL(import.meta.url.endsWith('.ts') ? '../../../../examples/pol-buck.json' : '../../../examples/pol-buck.json', import.meta.url),
);

export const demoCommand: Command = {
  name: 'demo',
  summary: 'run the example point-of-load buck scenario; writes CSV, summary JSON and an HTML report',
  usage: 'edgewise demo [--dir DIR] [--quiet]',
  options: [{ name: 'dir', value: 'DIR', help: 'output directory (default out/demo)' }, QUIET, HELP],
  example: 'edgewise demo',
  async run(args: ParsedArgs) {
    const quiet = optFlag(args, 'quiet');
    const dir = resolve(optValue(args, 'dir') ?? join('out', 'demo'));
    const { scenario } = loadScenarioFile(DEMO_SCENARIO);
    const plan = buildPlan(scenario, DEMO_SCENARIO);
    const targets = { csv: join(dir, 'waveforms.csv'), summary: join(dir, 'summary.json'), report: join(dir, 'report.html') };
    const outcome = await executeRun(plan, targets, quiet);
    const s = outcome.summary;
    const lines = [`demo: ${plan.name} (${DEMO_SCENARIO})`];
    for (const [name, m] of Object.entries(s.signals)) {
      lines.push(`  ${name}: mean ${formatQuantity(m.mean, m.unit)}, peak to peak ${formatQuantity(m.peakToPeak, m.unit)}`);
    }
    if (s.efficiency !== undefined) lines.push(`  efficiency ${(s.efficiency * 100).toFixed(2)} %`);
    lines.push(`wrote ${targets.csv}`, `wrote ${targets.summary}`, `wrote ${targets.report} (open it in a browser)`);
    say(quiet, lines.join('\n'));
    return 0;
  },
};
