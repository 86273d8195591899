/**
 * `edgewise run FILE`: transient simulation to CSV, summary JSON and an HTML report.
 * @module
 */
import { optFlag, optValue, type ParsedArgs } from '../args.ts';
import { csvToStdout, openCsvFile, type CsvColumn, type CsvWriter } from '../csv.ts';
import { RunFailure } from '../errors.ts';
import { ensureDir, makeProgress, writeFileAtomic } from '../io.ts';
import { renderRunReport } from '../report.ts';
import { runPlan, type RunOutcome } from '../runner.ts';
import { buildPlan, type Plan } from '../scenario/build.ts';
import { loadScenarioFile } from '../scenario/load.ts';
import { HELP, QUIET, say, scenarioArg, type Command } from './common.ts';

/** Where the outputs of a run go. */
export interface RunTargets {
  /** CSV file, '-' for stdout, or undefined for none. */
  readonly csv: string | undefined;
  /** Summary JSON file, '-' for stdout, or undefined. */
  readonly summary: string | undefined;
  /** HTML report file, or undefined. */
  readonly report: string | undefined;
}

/** CSV columns of a plan: time, the recorded signals with units, the topology key. */
export function csvColumns(plan: Plan): CsvColumn[] {
  return [
    { name: 'time', unit: 's' },
    ...plan.record.map((name, i) => ({ name, unit: plan.units[i]! })),
    { name: 'topology' },
  ];
}

/** Throws a RunFailure (exit status 1) for a failed run, with the engine's named error. */
export function failIfFailed(outcome: RunOutcome): void {
  const s = outcome.summary;
  if (s.status === 'failed') {
    const code = s.error?.code ?? 'failed';
    throw new RunFailure(`simulation failed (${code}): ${s.message}`);
  }
}

/** Runs a plan and writes its outputs atomically; returns the outcome. */
export async function executeRun(
  plan: Plan,
  targets: RunTargets,
  quiet: boolean,
  more: { readonly initialState?: Float64Array; readonly extra?: Record<string, unknown> } = {},
): Promise<RunOutcome> {
  const columns = csvColumns(plan);
  if (targets.csv !== undefined && targets.csv !== '-') ensureDir(targets.csv);
  const csv: CsvWriter | undefined =
    targets.csv === undefined ? undefined : targets.csv === '-' ? csvToStdout(columns) : openCsvFile(targets.csv, columns);
  const progress = makeProgress(`run ${plan.name}`, quiet);
  let outcome: RunOutcome;
  try {
    outcome = runPlan(plan, {
      ...(csv !== undefined ? { csv } : {}),
      ...(progress !== undefined ? { progress: (f: number) => progress.update(f) } : {}),
      keepWaveforms: targets.report !== undefined,
      ...(more.initialState !== undefined ? { initialState: more.initialState } : {}),
    });
    if (more.extra !== undefined) Object.assign(outcome.summary, more.extra);
    progress?.done();
    failIfFailed(outcome);
  } catch (err) {
    progress?.done();
    await csv?.abort();
    throw err;
  }
  await csv?.commit();
  const json = `${JSON.stringify(outcome.summary, null, 2)}\n`;
  if (targets.summary === '-') process.stdout.write(json);
  else if (targets.summary !== undefined) {
    ensureDir(targets.summary);
    writeFileAtomic(targets.summary, json);
  }
  if (targets.report !== undefined) {
    ensureDir(targets.report);
    writeFileAtomic(targets.report, renderRunReport(plan, outcome));
  }
  return outcome;
}

/** Derives sibling paths from a CSV path: x.csv -> x.summary.json, x.html. */
export function siblings(csvPath: string): { summary: string; report: string } {
  const stem = csvPath.replace(/\.csv$/i, '');
  return { summary: `${stem}.summary.json`, report: `${stem}.html` };
}

export const runCommand: Command = {
  name: 'run',
  summary: 'simulate a scenario in the time domain; CSV of the recorded signals, summary JSON, HTML report',
  usage: 'edgewise run FILE [--out FILE.csv] [--summary FILE.json|-] [--report FILE.html] [--no-report] [--quiet]',
  details: [
    'Without --out the CSV goes to standard output. With --out, the summary and the report are',
    'written next to it (x.csv -> x.summary.json, x.html) unless given otherwise. With',
    '"--summary -" the summary JSON goes to standard output and no CSV is written unless --out.',
    'Outputs are written to temporary files and renamed into place only when the run succeeds.',
  ].join('\n'),
  options: [
    { name: 'out', value: 'FILE', help: 'CSV output file (RFC 4180, units in the header)' },
    { name: 'summary', value: 'FILE', help: 'summary JSON file, or - for standard output' },
    { name: 'report', value: 'FILE', help: 'self-contained HTML report file' },
    { name: 'no-report', help: 'do not write the HTML report' },
    QUIET,
    HELP,
  ],
  example: 'edgewise run examples/pol-buck.json --out out/pol.csv',
  async run(args: ParsedArgs) {
    const file = scenarioArg(args, 'run');
    const quiet = optFlag(args, 'quiet');
    const { scenario } = loadScenarioFile(file);
    const plan = buildPlan(scenario, file);
    const out = optValue(args, 'out');
    const summaryOpt = optValue(args, 'summary');
    const sib = out !== undefined ? siblings(out) : undefined;
    const targets: RunTargets = {
      csv: out ?? (summaryOpt === '-' ? undefined : '-'),
      summary: summaryOpt ?? sib?.summary,
      report: optFlag(args, 'no-report') ? undefined : optValue(args, 'report') ?? sib?.report,
    };
    await executeRun(plan, targets, quiet);
    const wrote = [targets.csv, targets.summary, targets.report].filter((p): p is string => p !== undefined && p !== '-');
    if (wrote.length > 0) say(quiet, `wrote ${wrote.join(', ')}`);
    return 0;
  },
};
