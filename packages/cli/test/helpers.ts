/** Runs the real CLI binary as a subprocess. */
import { execFile } from 'node:child_process';
import { fileURLToPath } from 'node:url';

export const ROOT = fileURLToPath(new URL('../../../', import.meta.url));
export const BIN = fileURLToPath(new URL('../bin/edgewise.mjs', import.meta.url));

export interface CliResult {
  code: number;
  stdout: string;
  stderr: string;
}

/** Runs `node bin/edgewise.mjs ...args` from the repository root. */
export function cli(args: readonly string[], options: { cwd?: string } = {}): Promise<CliResult> {
  return new Promise((resolve) => {
    execFile(process.execPath, [BIN, ...args], { cwd: options.cwd ?? ROOT, maxBuffer: 64 << 20, env: { ...process.env, CI: '1' } }, (err, stdout, stderr) => {
      const code = err === null ? 0 : typeof (err as { code?: unknown }).code === 'number' ? ((err as { code: number }).code) : 1;
      resolve({ code, stdout, stderr });
    });
  });
}

/** Runs tasks with at most `limit` running at once. */
export async function inBatches<T, R>(items: readonly T[], limit: number, task: (item: T) => Promise<R>): Promise<R[]> {
  const out: R[] = new Array<R>(items.length);
  let next = 0;
  await Promise.all(Array.from({ length: Math.min(limit, items.length) }, async () => {
    while (next < items.length) {
      const i = next++;
      out[i] = await task(items[i]!);
    }
  }));
  return out;
}
