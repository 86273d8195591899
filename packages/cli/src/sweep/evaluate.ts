/**
 * Evaluates one sweep point: applies its assignments to the scenario JSON, validates and runs
 * it, and returns its result row as CSV fields. Used by workers and by the in-process path.
 * @module
 */
import { InputError } from '../errors.ts';
import { parseQuantity } from '../units.ts';
import { lookupDotted } from '../pointer.ts';
import { runPlan } from '../runner.ts';
import { buildPlan } from '../scenario/build.ts';
import { parseScenario } from '../scenario/load.ts';
import type { SweepSpec } from '../scenario/schema.ts';
import { applyAssignments, parameterColumns, pointAssignments } from './points.ts';

/** Header of a sweep result file. */
export function sweepHeader(sweep: SweepSpec): string[] {
  return ['point', ...parameterColumns(sweep), ...sweep.outputs, 'status', 'message'];
}

function num(x: unknown): string {
  if (typeof x === 'string') {
    // Quantities such as "3.3 Ohm" are written in SI numbers, like every other column.
    const q = parseQuantity(x);
    return q.ok ? String(q.value) : x;
  }
  return typeof x === 'number' && Number.isFinite(x) ? String(x) : '';
}

/** The result row of point `index` (never throws for a bad point: the row says why). */
export function evaluatePoint(base: unknown, sweep: SweepSpec, index: number): string[] {
  let assignments;
  try {
    assignments = pointAssignments(sweep, base, index);
  } catch (err) {
    return [String(index), ...parameterColumns(sweep).map(() => ''), ...sweep.outputs.map(() => ''), 'invalid', (err as Error).message];
  }
  const params = assignments.map((a) => num(a.value));
  const fail = (status: string, message: string): string[] => [String(index), ...params, ...sweep.outputs.map(() => ''), status, message];
  let doc: unknown;
  try {
    doc = applyAssignments(base, assignments);
  } catch (err) {
    return fail('invalid', (err as Error).message);
  }
  const parsed = parseScenario(doc);
  if (!parsed.ok) return fail('invalid', parsed.problems.join('; '));
  let outcome;
  try {
    const plan = buildPlan(parsed.scenario, `point ${index}`);
    outcome = runPlan(plan);
  } catch (err) {
    return fail(err instanceof InputError ? 'invalid' : 'failed', err instanceof InputError ? err.problems.join('; ') : (err as Error).message);
  }
  const s = outcome.summary;
  if (s.status === 'failed') return fail('failed', `${s.error?.code ?? 'failed'}: ${s.message}`);
  const outputs = sweep.outputs.map((p) => num(lookupDotted(s, p)));
  return [String(index), ...params, ...outputs, 'ok', ''];
}
