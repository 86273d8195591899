/**
 * Running a sweep: deterministic sharding, a journal for resuming, and a pool of worker
 * threads (one per core by default). Rows are written sorted by point index, so the output
 * does not depend on the number of workers, shards or restarts.
 * @module
 */
import { appendFileSync, existsSync, readFileSync, unlinkSync, writeFileSync } from 'node:fs';
import { availableParallelism } from 'node:os';
import { Worker } from 'node:worker_threads';
import { csvRecord, parseCsv } from '../csv.ts';
import { InputError } from '../errors.ts';
import { ensureDir, makeProgress, writeFileAtomic } from '../io.ts';
import type { SweepSpec } from '../scenario/schema.ts';
import { evaluatePoint, sweepHeader } from './evaluate.ts';
import { setAt } from '../pointer.ts';
import { axisValues, numericAt, pointCount } from './points.ts';

/** Options of {@link runSweep}. */
export interface SweepOptions {
  /** Output CSV path, or undefined for standard output. */
  readonly out: string | undefined;
  /** Shard k of n (1-based), or undefined for all points. */
  readonly shard: { readonly k: number; readonly n: number } | undefined;
  /** Threads computing points, this one included (1: this thread only). */
  readonly workers: number;
  /** Start the workers only when the work left is worth it (see {@link WORKER_WORTH_S}); default false: start them at once. */
  readonly adaptive?: boolean;
  /** Skip points already in the journal (or in a finished output). */
  readonly resume: boolean;
  readonly quiet: boolean;
}

/** Counts of a finished sweep. */
export interface SweepResult {
  readonly points: number;
  readonly computed: number;
  readonly reused: number;
  readonly ok: number;
  readonly failed: number;
  readonly invalid: number;
  /** Header and rows (sorted by point index) as written. */
  readonly header: readonly string[];
  readonly rows: readonly (readonly string[])[];
}

/** Parses "K/N" with 1 <= K <= N. */
export function parseShard(text: string): { k: number; n: number } {
  const m = /^(\d+)\/(\d+)$/.exec(text);
  const k = m ? Number(m[1]) : NaN;
  const n = m ? Number(m[2]) : NaN;
  if (!(Number.isInteger(k) && Number.isInteger(n) && n >= 1 && k >= 1 && k <= n)) {
    throw new InputError('edgewise sweep', [`--shard: expected K/N with 1 <= K <= N, received "${text}"`]);
  }
  return { k, n };
}

/** Checks that every sweep path addresses the scenario (before any work is started). */
export function checkSweepPaths(base: unknown, sweep: SweepSpec, where: string): void {
  const problems: string[] = [];
  const values = axisValues(sweep);
  (sweep.grid ?? []).forEach((axis, i) => {
    try {
      // The parent must exist; the last member may be new (an optional field).
      setAt(base, axis.path, values[i]![0]);
    } catch (err) {
      problems.push(`sweep.grid[${i}].path: ${(err as Error).message}`);
    }
  });
  (sweep.monteCarlo?.vary ?? []).forEach((v, i) => {
    try {
      numericAt(base, v.path);
    } catch (err) {
      problems.push(`sweep.monteCarlo.vary[${i}].path: ${(err as Error).message}`);
    }
  });
  if (problems.length > 0) throw new InputError(where, problems);
}

/** Reads the rows of an earlier (partial) run whose header matches; ignores a torn last line. */
function readDone(path: string, header: readonly string[]): Map<number, string[]> {
  const done = new Map<number, string[]>();
  if (!existsSync(path)) return done;
  let records: string[][];
  const text = readFileSync(path, 'utf8');
  try {
    records = parseCsv(text);
  } catch {
    // A torn final record (interrupted write): keep the complete lines only.
    const cut = text.lastIndexOf('\r\n', text.length - 3);
    records = cut > 0 ? parseCsv(text.slice(0, cut + 2)) : [];
  }
  if (records.length === 0) return done;
  if (records[0]!.join('\u0000') !== header.join('\u0000')) {
    throw new InputError(path, ['cannot resume: its columns differ from this sweep (remove the file or run without --resume)']);
  }
  for (const r of records.slice(1)) {
    if (r.length === header.length && /^\d+$/.test(r[0]!)) done.set(Number(r[0]), r);
  }
  return done;
}

/** Work left, seconds on this thread, above which adaptive sweeps start workers (about three worker start-ups, measured). */
export const WORKER_WORTH_S = 3;

/**
 * Computes the points on `threads` threads: this one plus `threads - 1` workers, each started
 * once and fed chunks of point indices from one queue until it is empty. This thread computes
 * chunks too, so the workers' start-up (loading tsx and the sources, about a second each) is
 * not idle time. With `adaptive`, workers start only once the first chunk shows that the rest
 * would take this thread longer than {@link WORKER_WORTH_S}: a worker costs about a second of
 * start-up and runs cold (its own compiled code and engine caches), so short sweeps are faster
 * on one thread.
 */
async function runPool(
  base: unknown,
  sweep: SweepSpec,
  indices: number[],
  threads: number,
  adaptive: boolean,
  onRows: (rows: string[][]) => void,
): Promise<void> {
  if (indices.length === 0) return;
  // chunks: several per thread so the threads finish together, few enough to keep messages rare
  const batch = Math.max(1, Math.min(16, Math.floor(indices.length / (threads * 8))));
  let next = 0;
  const take = (): number[] => {
    const b = indices.slice(next, next + batch);
    next += b.length;
    return b;
  };
  // from the sources the worker boots through tsx; from the bundle (packages/cli/dist, see
  // scripts/build-cli.mjs) it is the bundled worker next to this chunk
  const boot = new URL(import.meta.url.endsWith('.ts') ? './worker-boot.mjs' : './sweep-worker.mjs', import.meta.url);
  const workers: Worker[] = [];
  let pending = 0; // chunks handed to workers and not yet back
  let failure: Error | undefined;
  let finished = false;
  let wake: (() => void) | undefined;
  const nWorkers = Math.min(threads - 1, Math.ceil(indices.length / batch) - 1);
  const startWorkers = (): void => {
    for (let k = 0; k < nWorkers; k++) {
      const w = new Worker(boot, { workerData: { base, sweep } });
      workers.push(w);
      const feed = (): void => {
        const b = take();
        if (b.length === 0) return;
        pending++;
        w.postMessage({ indices: b });
      };
      w.on('message', (m: { ready?: boolean; rows?: string[][] }) => {
        if (m.rows !== undefined) {
          onRows(m.rows);
          pending--;
        }
        feed();
        if (pending === 0) wake?.();
      });
      w.on('error', (err) => {
        failure ??= err;
        wake?.();
      });
      w.on('exit', (code) => {
        if (!finished) {
          failure ??= new Error(`sweep worker exited with status ${code}`);
          wake?.();
        }
      });
    }
  };
  if (!adaptive) startWorkers();
  const t0 = performance.now();
  try {
    for (let b = take(); b.length > 0 && failure === undefined; b = take()) {
      onRows(b.map((p) => evaluatePoint(base, sweep, p)));
      if (adaptive && workers.length === 0 && nWorkers > 0) {
        // Start workers only when the work left would outlast their start-up by a margin.
        const perPointS = (performance.now() - t0) / 1000 / next;
        if (perPointS * (indices.length - next) > WORKER_WORTH_S) startWorkers();
      }
      // let the workers' messages in between chunks
      await new Promise<void>((r) => setImmediate(r));
    }
    while (pending > 0 && failure === undefined) await new Promise<void>((r) => (wake = r));
    if (failure !== undefined) throw failure;
  } finally {
    // workers still starting when the queue ran dry are not needed any more
    finished = true;
    await Promise.all(workers.map((w) => w.terminate()));
  }
}

/** Runs (a shard of) a sweep and writes its rows sorted by point index. */
export async function runSweep(base: unknown, sweep: SweepSpec, options: SweepOptions): Promise<SweepResult> {
  const header = sweepHeader(sweep);
  const total = pointCount(sweep);
  const mine: number[] = [];
  for (let i = 0; i < total; i++) if (options.shard === undefined || i % options.shard.n === options.shard.k - 1) mine.push(i);

  const out = options.out;
  const journal = out !== undefined ? `${out}.journal` : undefined;
  const done = new Map<number, string[]>();
  if (out !== undefined) ensureDir(out);
  if (options.resume && out !== undefined && journal !== undefined) {
    for (const [k, v] of readDone(out, header)) done.set(k, v);
    for (const [k, v] of readDone(journal, header)) done.set(k, v);
  }
  const wanted = new Set(mine);
  for (const k of [...done.keys()]) if (!wanted.has(k)) done.delete(k);
  const todo = mine.filter((i) => !done.has(i));
  if (journal !== undefined) {
    // Start a fresh journal holding what is already done, then append as points finish.
    writeFileSync(journal, [header, ...[...done.values()]].map(csvRecord).join(''));
  }
  const progress = makeProgress('sweep', options.quiet);
  const fresh: string[][] = [];
  let finished = 0;
  await runPool(base, sweep, todo, options.workers, options.adaptive ?? false, (rows) => {
    for (const r of rows) fresh.push(r);
    if (journal !== undefined) appendFileSync(journal, rows.map(csvRecord).join(''));
    finished += rows.length;
    progress?.update(finished / Math.max(1, todo.length), `${finished}/${todo.length} points`);
  });
  progress?.done();
  const all = [...done.values(), ...fresh].sort((a, b) => Number(a[0]) - Number(b[0]));
  const text = [header, ...all].map(csvRecord).join('');
  if (out === undefined) process.stdout.write(text);
  else {
    writeFileAtomic(out, text);
    if (journal !== undefined) unlinkSync(journal);
  }
  const statusCol = header.length - 2;
  const count = (s: string): number => all.filter((r) => r[statusCol] === s).length;
  return { points: all.length, computed: fresh.length, reused: done.size, ok: count('ok'), failed: count('failed'), invalid: count('invalid'), header, rows: all };
}

/** Default number of threads: os.availableParallelism(). */
export function defaultWorkers(): number {
  return availableParallelism();
}
