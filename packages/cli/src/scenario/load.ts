/**
 * Reading and validating scenario files: JSON syntax errors give line and column, schema
 * errors give the JSON path and the reason, all problems at once.
 * @module
 */
import { readFileSync } from 'node:fs';
import type { z } from 'zod';
import { InputError, formatPath } from '../errors.ts';
import { scenarioSchema, type Scenario } from './schema.ts';

/** Outcome of {@link parseScenario}. */
export type ScenarioParse = { ok: true; scenario: Scenario } | { ok: false; problems: string[] };

function describeIssue(issue: z.core.$ZodIssue): string {
  const path = formatPath(issue.path);
  let reason = issue.message;
  if (issue.code === 'invalid_union' && issue.errors.length > 0) {
    // Report the branch that got furthest: the one whose first issue has the longest path.
    let best: z.core.$ZodIssue | undefined;
    for (const branch of issue.errors) {
      const first = branch[0];
      if (first !== undefined && (best === undefined || first.path.length > best.path.length)) best = first;
    }
    if (best !== undefined && best.path.length > 0) {
      return describeIssue({ ...best, path: [...issue.path, ...best.path] });
    }
  }
  if (issue.code === 'unrecognized_keys') reason = `unknown field${issue.keys.length > 1 ? 's' : ''} ${issue.keys.map((k) => JSON.stringify(k)).join(', ')}`;
  return `${path}: ${reason}`;
}

/** Validates parsed JSON as a scenario (in-process; never throws). */
export function parseScenario(value: unknown): ScenarioParse {
  let result;
  try {
    result = scenarioSchema.safeParse(value);
  } catch (err) {
    return { ok: false, problems: [`(root): ${(err as Error).message}`] };
  }
  if (result.success) return { ok: true, scenario: result.data };
  const problems = [...new Set(result.error.issues.map(describeIssue))];
  return { ok: false, problems };
}

/** Parses JSON text; a syntax error becomes an InputError with line and column. */
export function parseJsonText(text: string, where: string): unknown {
  try {
    return JSON.parse(text) as unknown;
  } catch (err) {
    const msg = (err as Error).message;
    const m = /position (\d+)/.exec(msg);
    const pos = m ? Number(m[1]) : text.length;
    const before = text.slice(0, pos);
    const line = before.split('\n').length;
    const column = pos - before.lastIndexOf('\n');
    const reason = msg.replace(/ in JSON at position \d+.*$/s, '').replace(/^JSON\.parse: /, '');
    throw new InputError(where, [`invalid JSON at line ${line}, column ${column}: ${reason}`]);
  }
}

/** Reads a scenario file; throws InputError (exit status 2) on any problem. */
export function loadScenarioFile(file: string): { scenario: Scenario; raw: unknown } {
  let text: string;
  try {
    text = readFileSync(file, 'utf8');
  } catch (err) {
    const code = (err as NodeJS.ErrnoException).code;
    throw new InputError(file, [code === 'ENOENT' ? 'file not found' : `cannot read the file (${code ?? (err as Error).message})`]);
  }
  if (text.charCodeAt(0) === 0xfeff) text = text.slice(1);
  const raw = parseJsonText(text, file);
  const parsed = parseScenario(raw);
  if (!parsed.ok) throw new InputError(file, parsed.problems);
  return { scenario: parsed.scenario, raw };
}
