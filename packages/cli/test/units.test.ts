import { describe, expect, it } from 'vitest';
import fc from 'fast-check';
import { formatQuantity, parseQuantity, type ParseResult } from '../src/units.ts';

/** Unwraps a successful parse, failing the test with the parser's message otherwise. */
function valueOf(result: ParseResult): number {
  if (!result.ok) throw new Error(`expected ok, got: ${result.message}`);
  return result.value;
}

function expectRejected(result: ParseResult): string {
  expect(result.ok).toBe(false);
  return result.ok ? '' : result.message;
}

// Prefix values: SI Brochure, 9th edition (2019), section 3, table 7 (SI prefixes).
describe('parseQuantity', () => {
  it.each<[string, number]>([
    ['4.7 uH', 4.7e-6],
    ['4.7uH', 4.7e-6],
    ['4.7 \u00b5H', 4.7e-6], // MICRO SIGN
    ['4.7 \u03bcH', 4.7e-6], // GREEK SMALL LETTER MU
    ['500 kHz', 500e3],
    ['22 uF', 22e-6],
    ['10 mOhm', 10e-3],
    ['10 m\u03a9', 10e-3], // GREEK CAPITAL LETTER OMEGA
    ['10 m\u2126', 10e-3], // OHM SIGN
    ['10 mohm', 10e-3],
    ['1.5e-3 A', 1.5e-3],
    ['12 V', 12],
    ['2 k', 2000],
    ['100 ns', 100e-9],
    ['3.3V', 3.3],
    ['  3.3 V  ', 3.3],
    ['1 MHz', 1e6],
    ['1 mHz', 1e-3],
    ['2.2 GOhm', 2.2e9],
    ['1 TJ', 1e12],
    ['1 T', 1e12],
    ['5 fF', 5e-15],
    ['5 pF', 5e-12],
    ['7 aC', 7e-18],
    ['3 zJ', 3e-21],
    ['4 yW', 4e-24],
    ['1 S', 1], // siemens, not a prefix
    ['1 mS', 1e-3],
    ['1 s', 1],
    ['1 ms', 1e-3],
    ['1 F', 1], // farad, not femto
    ['1 m', 1e-3], // prefix alone
    ['1 M', 1e6],
    ['-5 V', -5],
    ['\u22125 V', -5], // MINUS SIGN
    ['+5 V', 5],
    ['.5 A', 0.5],
    ['5. A', 5],
    ['1E3', 1000],
    ['1e+3 Hz', 1000],
    ['0', 0],
    ['1e21', 1e21],
  ])('parses %j as %d', (input, expected) => {
    expect(valueOf(parseQuantity(input))).toBe(expected);
  });

  it('passes finite numbers through and rejects non-finite ones', () => {
    expect(valueOf(parseQuantity(4.7e-6))).toBe(4.7e-6);
    expect(valueOf(parseQuantity(-0.5, 'V'))).toBe(-0.5);
    expectRejected(parseQuantity(Number.NaN));
    expectRejected(parseQuantity(Number.POSITIVE_INFINITY));
    expectRejected(parseQuantity(Number.NEGATIVE_INFINITY));
  });

  it.each(['', '   ', 'abc', '1..2', 'NaN', 'Infinity', '-Infinity', '1e999', '1e-999', 'uH', '4.7 u H',
    '4.7 meg', '4.7 Meg', '4.7 MEG', '0x10', '1_000', '4.7 uuH', '4.7 h', '4.7 hz', '1,5 V', 'e3', '1e', '--1'])(
    'rejects %j with a message',
    (input) => {
      const message = expectRejected(parseQuantity(input));
      expect(message.length).toBeGreaterThan(0);
    },
  );

  it('checks the unit against the expected one and names both', () => {
    expect(valueOf(parseQuantity('4.7 uH', 'H'))).toBe(4.7e-6);
    expect(valueOf(parseQuantity('10 mΩ', 'Ohm'))).toBe(0.01);
    expect(valueOf(parseQuantity('10 mOhm', 'Ω'))).toBe(0.01);
    expect(valueOf(parseQuantity('2 k', 'Ohm'))).toBe(2000); // no unit: taken as the expected one
    const message = expectRejected(parseQuantity('4.7 uF', 'H'));
    expect(message).toContain('expected a value in H');
    expect(message).toContain('received one in F');
    expect(expectRejected(parseQuantity('1 S', 's'))).toContain('received one in S');
    expect(expectRejected(parseQuantity('1 V', 'volt'))).toContain('"volt"');
  });

  it('gives correctly rounded values (one decimal literal, not a product)', () => {
    // 4.7 * 1e-6 would be 4.7000000000000004e-6 in binary64.
    expect(valueOf(parseQuantity('4.7 uH'))).toBe(Number('4.7e-6'));
    expect(valueOf(parseQuantity('0.1 uF'))).toBe(1e-7);
  });

  it('never throws and never returns a non-finite value on arbitrary input', () => {
    fc.assert(
      fc.property(fc.oneof(fc.string({ unit: 'binary' }), quantityLikeString()), fc.option(fc.constantFrom('V', 'Ohm', 'H', 'x')), (s, unit) => {
        const result = unit === null ? parseQuantity(s) : parseQuantity(s, unit);
        if (result.ok) expect(Number.isFinite(result.value)).toBe(true);
        else expect(typeof result.message).toBe('string');
      }),
      { seed: 7, numRuns: 500 },
    );
  });
});

/** Strings that look like quantities, to reach deep parser paths more often than random text. */
function quantityLikeString(): fc.Arbitrary<string> {
  return fc
    .tuple(
      fc.constantFrom('', '-', '+', '\u2212'),
      fc.stringMatching(/^[0-9.eE+-]{1,8}$/),
      fc.constantFrom('', ' ', '  '),
      fc.constantFrom('', 'y', 'z', 'a', 'f', 'p', 'n', 'u', 'µ', 'μ', 'm', 'k', 'M', 'G', 'T', 'x'),
      fc.constantFrom('', 'V', 'A', 'W', 'Ohm', 'Ω', 'H', 'F', 'Hz', 's', 'S', 'C', 'J', 'meg', 'q'),
    )
    .map((parts) => parts.join(''));
}

describe('formatQuantity', () => {
  it.each<[number, string, number | undefined, string]>([
    [4.7e-6, 'H', undefined, '4.7 uH'],
    [500e3, 'Hz', undefined, '500 kHz'],
    [22e-6, 'F', undefined, '22 uF'],
    [0.01, 'Ohm', undefined, '10 mOhm'],
    [12, 'V', undefined, '12 V'],
    [0, 'A', undefined, '0 A'],
    [-0.0015, 'A', undefined, '-1.5 mA'],
    [999.96, 'V', undefined, '1 kV'], // rounding carries into the next prefix
    [999.94, 'V', undefined, '999.9 V'],
    [1e-9, 's', undefined, '1 ns'],
    [123456, 'Hz', 3, '123 kHz'],
    [2000, '', undefined, '2 k'],
    [1.5, '', undefined, '1.5'],
    [1e15, 'Hz', undefined, '1e3 THz'], // beyond tera the mantissa takes an exponent
    [1e-27, 'F', undefined, '1e-3 yF'], // below yocto likewise
    [123.456, 'V', 2, '120 V'],
    [0.1 + 0.2, 'V', 17, '300.00000000000004 mV'],
    [Number.NaN, 'V', undefined, 'NaN V'],
  ])('formats %d %s (digits %s) as %j', (value, unit, digits, expected) => {
    expect(digits === undefined ? formatQuantity(value, unit) : formatQuantity(value, unit, digits)).toBe(expected);
  });

  it('is exact at 17 digits (every binary64 value has a unique 17-digit decimal)', () => {
    fc.assert(
      fc.property(fc.double({ noNaN: true, noDefaultInfinity: true }), (value) => {
        expect(valueOf(parseQuantity(formatQuantity(value, 'A', 17), 'A'))).toBe(value === 0 ? 0 : value);
      }),
      { seed: 7, numRuns: 500 },
    );
  });

  it('rejects a digits count outside 1..17', () => {
    expect(() => formatQuantity(1, 'V', 0)).toThrow(RangeError);
    expect(() => formatQuantity(1, 'V', 2.5)).toThrow(RangeError);
    expect(() => formatQuantity(1, 'V', 18)).toThrow(RangeError);
  });

  it('round-trips through parseQuantity within 10^-(digits-1) relative', () => {
    const units = ['V', 'A', 'W', 'Ohm', 'Ω', 'H', 'F', 'Hz', 's', 'S', 'C', 'J', ''] as const;
    fc.assert(
      fc.property(
        fc.double({ noNaN: true, noDefaultInfinity: true, min: -1e300, max: 1e300 }),
        fc.constantFrom(...units),
        fc.integer({ min: 1, max: 17 }),
        (value, unit, digits) => {
          const text = formatQuantity(value, unit, digits);
          const parsed = unit === '' ? parseQuantity(text) : parseQuantity(text, unit);
          if (!parsed.ok) throw new Error(`${text}: ${parsed.message}`);
          const tolerance = 10 ** -(digits - 1);
          expect(Math.abs(parsed.value - value)).toBeLessThanOrEqual(tolerance * Math.abs(value));
        },
      ),
      { seed: 7, numRuns: 500 },
    );
  });
});
