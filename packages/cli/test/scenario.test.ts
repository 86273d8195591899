/**
 * The scenario parser in-process: never crashes on junk, reports every problem as
 * "path: reason"; quantities round-trip.
 */
import fc from 'fast-check';
import { readFileSync } from 'node:fs';
import { describe, expect, it } from 'vitest';
import { buildPlan } from '../src/scenario/build.ts';
import { parseScenario } from '../src/scenario/load.ts';
import { InputError } from '../src/errors.ts';
import { formatQuantity, parseQuantity } from '../src/units.ts';

const valid = JSON.parse(readFileSync(new URL('../../../examples/pol-buck-open-loop.json', import.meta.url), 'utf8')) as unknown;
const PROBLEM = /^(\(root\)|[A-Za-z$_][\w$-]*|\[\d+\])(\.[\w$-]+|\[\d+\]|\["[^"]*"\])*: \S/;

function checkOutcome(doc: unknown): void {
  const r = parseScenario(doc);
  if (r.ok) {
    // A schema-valid scenario either builds or gives InputErrors with paths; nothing else.
    try {
      buildPlan(r.scenario, 'x');
    } catch (err) {
      expect(err).toBeInstanceOf(InputError);
    }
  } else {
    expect(r.problems.length).toBeGreaterThan(0);
    for (const p of r.problems) expect(p).toMatch(PROBLEM);
  }
}

/** Replaces the value at a random path of a JSON document. */
function mutate(doc: unknown, picks: number[], replacement: unknown): unknown {
  const copy = structuredClone(doc) as Record<string | number, unknown>;
  let cur: Record<string | number, unknown> = copy;
  for (const p of picks) {
    const keys = Object.keys(cur);
    if (keys.length === 0) break;
    const k = keys[p % keys.length]!;
    const next = cur[k];
    if (next !== null && typeof next === 'object' && p % 3 !== 0) cur = next as Record<string | number, unknown>;
    else {
      cur[k] = replacement;
      return copy;
    }
  }
  return copy;
}

describe('scenario parser', () => {
  it('accepts the example scenario', () => {
    expect(parseScenario(valid).ok).toBe(true);
  });
  it('never throws on random JSON (fast-check, seed 7)', () => {
    fc.assert(fc.property(fc.jsonValue(), (doc) => checkOutcome(doc)), { seed: 7, numRuns: 500 });
  });
  it('never throws on mutated valid scenarios; problems name a path and a reason (fast-check, seed 11)', () => {
    const junk = fc.oneof(fc.jsonValue(), fc.constantFrom('4.7 uF', '12 Hz', '-1 Ohm', 'NaN', '', '1e999 V', null, -1, 0, 1e308));
    fc.assert(
      fc.property(fc.array(fc.nat(50), { minLength: 1, maxLength: 6 }), junk, (picks, replacement) => {
        checkOutcome(mutate(valid, picks, replacement));
      }),
      { seed: 11, numRuns: 400 },
    );
  });
  it('checks units against the field', () => {
    const doc = structuredClone(valid) as { plant: { elements: Record<string, unknown>[] } };
    doc.plant.elements[4]!.henries = '1.5 uF';
    doc.plant.elements[6]!.ohms = '-2 Ohm';
    const r = parseScenario(doc);
    expect(r.ok).toBe(false);
    if (!r.ok) {
      expect(r.problems).toEqual([
        'plant.elements[4].henries: "1.5 uF": expected a value in H, received one in F',
        'plant.elements[6].ohms: must be > 0, received "-2 Ohm"',
      ]);
    }
  });
});

describe('quantities', () => {
  it('round-trip through formatQuantity and parseQuantity with the unit checked (fast-check, seed 3)', () => {
    fc.assert(
      fc.property(fc.double({ min: 1e-20, max: 1e11, noNaN: true }), fc.constantFrom('H', 'F', 'Ohm', 'V', 'A', 'Hz', 's'), (x, unit) => {
        const text = formatQuantity(x, unit === 'Ohm' ? 'Ohm' : unit, 17);
        const back = parseQuantity(text, unit);
        expect(back.ok).toBe(true);
        if (back.ok) expect(back.value).toBe(x);
      }),
      { seed: 3, numRuns: 500 },
    );
  });
  it('reads micro as u, the micro sign and the Greek mu', () => {
    for (const t of ['4.7 uH', '4.7 \u00b5H', '4.7 \u03bcH', '4.7e-6', '0.0047 mH']) {
      const r = parseQuantity(t, 'H');
      expect(r.ok && r.value).toBe(4.7e-6);
    }
  });
});
