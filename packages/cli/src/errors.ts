/**
 * Errors the CLI reports without a stack trace: invalid input (exit status 2) and a failure
 * during a simulation (exit status 1).
 * @module
 */

/** Invalid input: bad arguments, unreadable or invalid scenario files. Exit status 2. */
export class InputError extends Error {
  readonly exitCode = 2;
  /** Each problem as "path: reason". */
  readonly problems: readonly string[];
  constructor(where: string, problems: readonly string[]) {
    super(
      problems.length === 1
        ? `${where}: ${problems[0]!}`
        : `${where}: ${problems.length} problems:\n${problems.map((p) => `  ${p}`).join('\n')}`,
    );
    this.name = 'InputError';
    this.problems = problems;
  }
}

/** A simulation that failed (the engine's named error). Exit status 1. */
export class RunFailure extends Error {
  readonly exitCode = 1;
  constructor(message: string) {
    super(message);
    this.name = 'RunFailure';
  }
}

/** Formats a JSON path as `plant.elements[2].henries` (the root is `(root)`). */
export function formatPath(path: readonly PropertyKey[]): string {
  let s = '';
  for (const k of path) {
    if (typeof k === 'number') s += `[${k}]`;
    else {
      const key = String(k);
      s += /^[A-Za-z_$][\w$-]*$/.test(key) ? (s === '' ? key : `.${key}`) : `[${JSON.stringify(key)}]`;
    }
  }
  return s === '' ? '(root)' : s;
}
