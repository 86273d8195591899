/**
 * Small file helpers: atomic writes (temporary file, then rename) so that no partial output is
 * left behind, and progress shown on a terminal only.
 * @module
 */
import { mkdirSync, renameSync, unlinkSync, writeFileSync } from 'node:fs';
import { dirname } from 'node:path';

/** Writes a whole file atomically: to `<path>.partial-<pid>`, then renamed over `path`. */
export function writeFileAtomic(path: string, data: string): void {
  const temp = `${path}.partial-${process.pid}`;
  try {
    writeFileSync(temp, data);
    renameSync(temp, path);
  } catch (err) {
    try {
      unlinkSync(temp);
    } catch {
      // nothing to remove
    }
    throw err;
  }
}

/** Makes the parent directory of a file. */
export function ensureDir(path: string): void {
  mkdirSync(dirname(path), { recursive: true });
}

/** A progress line on stderr, only when stderr is a terminal and not quiet. */
export interface Progress {
  update(fraction: number, label?: string): void;
  done(): void;
}

/** Makes a progress reporter (silent in pipes, CI and with --quiet). */
export function makeProgress(label: string, quiet: boolean): Progress | undefined {
  if (quiet || process.stderr.isTTY !== true) return undefined;
  let lastDraw = 0;
  let shown = false;
  return {
    update(fraction, extra) {
      const now = Date.now();
      if (now - lastDraw < 100 && fraction < 1) return;
      lastDraw = now;
      shown = true;
      const pct = Math.min(100, Math.max(0, fraction * 100)).toFixed(0).padStart(3);
      process.stderr.write(`\r${label} ${pct}%${extra !== undefined ? ` ${extra}` : ''}\x1b[K`);
    },
    done() {
      if (shown) process.stderr.write('\r\x1b[K');
    },
  };
}
