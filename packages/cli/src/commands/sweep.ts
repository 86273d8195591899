/**
 * `edgewise sweep FILE` and `edgewise merge`.
 * @module
 */
import { optFlag, optValue, type ParsedArgs } from '../args.ts';
import { InputError } from '../errors.ts';
import { ensureDir, writeFileAtomic } from '../io.ts';
import { buildPlan } from '../scenario/build.ts';
import { loadScenarioFile } from '../scenario/load.ts';
import { mergeSweepFiles } from '../sweep/merge.ts';
import { renderSweepReport } from '../sweep/report.ts';
import { pointCount } from '../sweep/points.ts';
import { checkSweepPaths, defaultWorkers, parseShard, runSweep } from '../sweep/run.ts';
import { HELP, QUIET, say, scenarioArg, type Command } from './common.ts';

export const sweepCommand: Command = {
  name: 'sweep',
  summary: 'grid sweeps and seeded Monte Carlo runs over scenario parameters; one CSV row per point',
  usage: 'edgewise sweep FILE [--out FILE.csv] [--workers N] [--shard K/N] [--resume] [--report FILE.html [--x PATH] [--chart COLUMNS]] [--quiet]',
  details: [
    'The scenario\'s "sweep" section lists grid axes and Monte Carlo variations, each addressing a',
    'parameter by JSON Pointer (RFC 6901; inside arrays an item may be named by its id, e.g.',
    '"/plant/elements/L1/henries"), and the summary values to write ("signals.out.mean").',
    'Rows are sorted by point index and do not depend on workers or shards: run shards on',
    'several machines with --shard K/N and join them with `edgewise merge`. With --out, finished',
    'points go to FILE.csv.journal as they complete; --resume skips them after an interruption.',
  ].join('\n'),
  options: [
    { name: 'out', value: 'FILE', help: 'result CSV (default: standard output)' },
    { name: 'workers', value: 'N', help: 'threads computing points, this one included (default: os.availableParallelism(), workers started only when the first points show more than a few seconds of work left; 1: no worker threads)' },
    { name: 'shard', value: 'K/N', help: 'compute only the points with index % N == K - 1' },
    { name: 'resume', help: 'skip points already in FILE.csv.journal or FILE.csv' },
    { name: 'report', value: 'FILE', help: 'HTML report: outputs against a grid parameter' },
    { name: 'x', value: 'PATH', help: 'grid parameter of the report\'s x axis (default: the first grid axis)' },
    { name: 'chart', value: 'COLUMNS', help: 'comma-separated outputs to chart (default: all outputs)' },
    QUIET,
    HELP,
  ],
  example: 'edgewise sweep examples/pol-sweep.json --out out/sweep.csv --report out/sweep.html --chart signals.out.mean',
  async run(args: ParsedArgs) {
    const file = scenarioArg(args, 'sweep');
    const quiet = optFlag(args, 'quiet');
    const { scenario, raw } = loadScenarioFile(file);
    if (scenario.sweep === undefined) throw new InputError(file, ['sweep: missing; add a "sweep" section with "grid" or "monteCarlo" and "outputs"']);
    buildPlan(scenario, file); // the base scenario itself must be valid
    checkSweepPaths(raw, scenario.sweep, file);
    const w = optValue(args, 'workers');
    const workers = w === undefined ? defaultWorkers() : Number(w);
    if (!(Number.isInteger(workers) && workers >= 1)) throw new InputError('edgewise sweep', [`--workers: expected a whole number >= 1, received "${w}"`]);
    const shardText = optValue(args, 'shard');
    const out = optValue(args, 'out');
    const resume = optFlag(args, 'resume');
    if (resume && out === undefined) throw new InputError('edgewise sweep', ['--resume needs --out (the journal lives next to the output)']);
    const report = optValue(args, 'report');
    const chart = optValue(args, 'chart');
    const choice = { x: optValue(args, 'x'), columns: chart === undefined ? undefined : chart.split(',').map((c) => c.trim()).filter((c) => c !== '') };
    if (report !== undefined) {
      // check the choice before any point is computed
      renderSweepReport(file, scenario.sweep, [], [], choice);
    }
    const result = await runSweep(raw, scenario.sweep, {
      out,
      shard: shardText === undefined ? undefined : parseShard(shardText),
      workers,
      // an explicit --workers starts them at once; by default only when the sweep is long enough
      adaptive: w === undefined,
      resume,
      quiet,
    });
    if (report !== undefined) {
      ensureDir(report);
      writeFileAtomic(report, renderSweepReport(scenario.name ?? file, scenario.sweep, result.header, result.rows, choice));
    }
    say(quiet, `sweep: ${result.points} of ${pointCount(scenario.sweep)} points (${result.ok} ok, ${result.failed} failed, ${result.invalid} invalid; ${result.reused} reused)${out !== undefined ? `, wrote ${out}` : ''}`);
    return 0;
  },
};

export const mergeCommand: Command = {
  name: 'merge',
  summary: 'join shard outputs of one sweep into one CSV sorted by point index',
  usage: 'edgewise merge --out FILE.csv SHARD.csv... [--quiet]',
  options: [{ name: 'out', value: 'FILE', help: 'merged CSV (default: standard output)' }, QUIET, HELP],
  example: 'edgewise merge --out out/sweep.csv out/shard-1.csv out/shard-2.csv out/shard-3.csv',
  async run(args: ParsedArgs) {
    if (args.positional.length === 0) throw new InputError('edgewise merge', ['give the shard files to merge']);
    const quiet = optFlag(args, 'quiet');
    const merged = mergeSweepFiles(args.positional);
    const out = optValue(args, 'out');
    if (out === undefined) process.stdout.write(merged.text);
    else {
      ensureDir(out);
      writeFileAtomic(out, merged.text);
    }
    say(quiet, `merge: ${merged.points} points${merged.gaps > 0 ? ` (${merged.gaps} missing below the highest index)` : ''}${out !== undefined ? `, wrote ${out}` : ''}`);
    return 0;
  },
};
