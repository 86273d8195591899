/**
 * CLI benchmarks (numbers and ratios measured side by side in one run; not a test):
 * - sweep throughput, points per second: library loop, one thread, all cores, and the binary;
 * - CLI overhead (process start, tsx, parsing, CSV) over the library on a short run.
 * Run: npx tsx packages/cli/bench/cli.bench.ts
 */
import { execFileSync } from 'node:child_process';
import { mkdtempSync, readFileSync, writeFileSync } from 'node:fs';
import { availableParallelism, loadavg, tmpdir } from 'node:os';
import { join } from 'node:path';
import { fileURLToPath } from 'node:url';
import { buildPlan } from '../src/scenario/build.ts';
import { parseScenario } from '../src/scenario/load.ts';
import { runPlan } from '../src/runner.ts';
import { WORKER_WORTH_S, runSweep } from '../src/sweep/run.ts';
import { evaluatePoint } from '../src/sweep/evaluate.ts';
import { pointCount } from '../src/sweep/points.ts';
import type { SweepSpec } from '../src/scenario/schema.ts';

const root = fileURLToPath(new URL('../../../', import.meta.url));
const bin = join(root, 'packages/cli/bin/edgewise.mjs');
const tmp = mkdtempSync(join(tmpdir(), 'edgewise-bench-'));

// Sweep throughput: the example sweep widened to 480 points so that worker start-up (tsx in
// each thread, about a second) is amortised; the same points on one thread, on all cores
// (this thread plus workers fed in chunks), in a plain library loop, and through the binary.
const raw = JSON.parse(readFileSync(join(root, 'examples/pol-sweep.json'), 'utf8')) as { sweep: { grid: { points?: number }[]; monteCarlo: { samples: number } } };
raw.sweep.grid[0]!.points = 20;
raw.sweep.monteCarlo.samples = 12;
const parsed = parseScenario(raw);
if (!parsed.ok) throw new Error(parsed.problems.join('\n'));
const sweep = parsed.scenario.sweep as SweepSpec;
const n = pointCount(sweep);
const cores = availableParallelism();
const time = async (f: () => Promise<unknown>): Promise<number> => {
  const t0 = performance.now();
  await f();
  return (performance.now() - t0) / 1000;
};
const loop = await time(async () => {
  for (let i = 0; i < n; i++) evaluatePoint(raw, sweep, i);
});
const one = await time(() => runSweep(raw, sweep, { out: join(tmp, 'one.csv'), shard: undefined, workers: 1, resume: false, quiet: true }));
const all = await time(() => runSweep(raw, sweep, { out: join(tmp, 'all.csv'), shard: undefined, workers: cores, resume: false, quiet: true }));
const adaptive = await time(() => runSweep(raw, sweep, { out: join(tmp, 'adaptive.csv'), shard: undefined, workers: cores, adaptive: true, resume: false, quiet: true }));
const wide = join(tmp, 'wide.json');
writeFileSync(wide, JSON.stringify(raw));
const bin1 = await time(async () => execFileSync(process.execPath, [bin, 'sweep', wide, '--out', join(tmp, 'bin1.csv'), '--workers', '1', '--quiet']));
const binAll = await time(async () => execFileSync(process.execPath, [bin, 'sweep', wide, '--out', join(tmp, 'binall.csv'), '--quiet']));
const rate = (t: number): string => `${(n / t).toFixed(1)} points/s`;
console.log(`sweep of ${n} points on ${cores} cores (load average ${loadavg()[0]!.toFixed(1)}):`);
console.log(`  library loop          ${rate(loop)}`);
console.log(`  runSweep, 1 thread    ${rate(one)}  (${(one / loop).toFixed(2)}x the loop's time)`);
console.log(`  runSweep, ${cores} threads   ${rate(all)}  speed-up ${(one / all).toFixed(2)}x over 1 thread (workers started at once; includes their start-up)`);
console.log(`  runSweep, adaptive    ${rate(adaptive)}  speed-up ${(one / adaptive).toFixed(2)}x over 1 thread (workers only when the rest is worth more than ${WORKER_WORTH_S} s)`);
console.log(`  binary, 1 thread      ${rate(bin1)}  (CLI/library time ${(bin1 / loop).toFixed(2)}x)`);
console.log(`  binary, default       ${rate(binAll)}  speed-up ${(bin1 / binAll).toFixed(2)}x over 1 thread`);

// CLI overhead on a short run: the same scenario through the library and through the binary.
const scenarioFile = join(root, 'test-vectors/buck-ccm-ratio.json');
const s = parseScenario(JSON.parse(readFileSync(scenarioFile, 'utf8')));
if (!s.ok) throw new Error(s.problems.join('\n'));
const reps = 5;
const lib = await time(async () => {
  for (let i = 0; i < reps; i++) runPlan(buildPlan(s.scenario, scenarioFile));
});
const proc = await time(async () => {
  for (let i = 0; i < reps; i++) execFileSync(process.execPath, [bin, 'run', scenarioFile, '--summary', '-', '--quiet']);
});
console.log(`short run (${reps}x): library ${(1000 * lib / reps).toFixed(1)} ms, CLI ${(1000 * proc / reps).toFixed(1)} ms per run, CLI/library ratio ${(proc / lib).toFixed(1)}x`);
