/**
 * Zod types for physical quantities in scenario files: a finite SI number, or a string with
 * an optional SI prefix and unit ("4.7 uH", "500 kHz", "22 µF") whose unit must match the field.
 * @module
 */
import { z } from 'zod';
import { parseQuantity } from '../units.ts';

/** Units a scenario field may carry ('1' for dimensionless ratios). */
export type FieldUnit = 'V' | 'A' | 'Ω' | 'H' | 'F' | 'Hz' | 's' | 'W' | 'J' | 'C' | '1';

/** Range constraint of a quantity field. */
export type Bound = 'any' | 'positive' | 'nonnegative' | 'fraction';

const UNIT_WORD: Record<FieldUnit, string> = {
  V: 'volts', A: 'amperes', 'Ω': 'ohms', H: 'henries', F: 'farads', Hz: 'hertz', s: 'seconds', W: 'watts', J: 'joules', C: 'coulombs', '1': 'a plain number',
};

const BOUND_TEXT: Record<Bound, string> = {
  any: '',
  positive: ' > 0',
  nonnegative: ' >= 0',
  fraction: ' in [0, 1]',
};

/**
 * A quantity field: accepts a finite number (SI units) or a string such as "4.7 uH" in the
 * field's unit; the output is always a number in SI units.
 */
export function quantity(unit: FieldUnit, bound: Bound = 'any', what?: string) {
  const describe = `${what !== undefined ? `${what}: ` : ''}${unit === '1' ? 'number' : `${UNIT_WORD[unit]}; a number in ${unit} or a string such as "4.7 m${unit}"`}${BOUND_TEXT[bound]}`;
  return z
    .union([z.number(), z.string()])
    .transform((input, ctx) => {
      const parsed = unit === '1'
        ? (typeof input === 'number' ? parseQuantity(input) : parseQuantity(input))
        : parseQuantity(input, unit === 'Ω' ? 'Ohm' : unit);
      if (!parsed.ok) {
        ctx.addIssue({ code: 'custom', message: parsed.message, input });
        return z.NEVER;
      }
      const v = parsed.value;
      const bad =
        (bound === 'positive' && !(v > 0)) ||
        (bound === 'nonnegative' && !(v >= 0)) ||
        (bound === 'fraction' && !(v >= 0 && v <= 1));
      if (bad) {
        ctx.addIssue({ code: 'custom', message: `must be${BOUND_TEXT[bound]}, received ${JSON.stringify(input)}`, input });
        return z.NEVER;
      }
      return v;
    })
    .meta({ description: describe });
}

/** A positive integer count (cycles, points, samples). */
export function count(what: string, min = 1) {
  return z.number().int().min(min).meta({ description: what });
}
