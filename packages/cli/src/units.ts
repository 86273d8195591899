/**
 * Parsing and formatting of SI quantities such as `"4.7 uH"`, `"500 kHz"` or `"10 mΩ"`.
 *
 * Only the SI decimal prefixes (SI Brochure, 9th edition, section 3, table 7) from yocto to
 * tera are understood, plus the ASCII `u` as a stand-in for micro. Unit symbols are
 * case-sensitive as in the SI Brochure: `m` is milli, `M` is mega, `s` is second, `S` is
 * siemens.
 *
 * @module
 */

/** Outcome of {@link parseQuantity}: either a finite value in SI base units, or a message. */
export type ParseResult = { ok: true; value: number } | { ok: false; message: string };

/** SI prefix symbol to decimal exponent (SI Brochure 9th ed., table 7), yocto to tera. */
const PREFIX_EXPONENTS: ReadonlyMap<string, number> = new Map([
  ['y', -24],
  ['z', -21],
  ['a', -18],
  ['f', -15],
  ['p', -12],
  ['n', -9],
  ['u', -6], // ASCII stand-in for micro
  ['\u00b5', -6], // MICRO SIGN
  ['\u03bc', -6], // GREEK SMALL LETTER MU
  ['m', -3],
  ['k', 3],
  ['M', 6],
  ['G', 9],
  ['T', 12],
]);

/** Accepted unit spellings mapped to one canonical symbol (used to compare units). */
const UNIT_CANONICAL: ReadonlyMap<string, string> = new Map([
  ['V', 'V'],
  ['A', 'A'],
  ['W', 'W'],
  ['Ohm', 'Ω'],
  ['ohm', 'Ω'],
  ['\u03a9', 'Ω'], // GREEK CAPITAL LETTER OMEGA
  ['\u2126', 'Ω'], // OHM SIGN (canonically equivalent to U+03A9)
  ['H', 'H'],
  ['F', 'F'],
  ['Hz', 'Hz'],
  ['s', 's'],
  ['S', 'S'],
  ['C', 'C'],
  ['J', 'J'],
]);

/** Engineering prefixes used for output, by exponent / 3 + 8 (ASCII `u` for micro). */
const OUTPUT_PREFIXES = ['y', 'z', 'a', 'f', 'p', 'n', 'u', 'm', '', 'k', 'M', 'G', 'T'] as const;
const MIN_OUTPUT_EXPONENT = -24;
const MAX_OUTPUT_EXPONENT = 12;

/**
 * Number part: optional sign (ASCII or U+2212 MINUS SIGN), decimal digits with at most one
 * decimal point, optional exponent. Rest: optional white space, then the prefix/unit suffix.
 */
const QUANTITY_PATTERN =
  /^([+\-\u2212]?)(\d+(?:\.\d*)?|\.\d+)(?:[eE]([+-]?\d+))?(?:\s*)(\S*)$/u;

/** Returns the canonical symbol of a unit spelling, or `undefined` if it is not accepted. */
function canonicalUnit(unit: string): string | undefined {
  return UNIT_CANONICAL.get(unit);
}

/** Splits a suffix such as `"kHz"`, `"m"`, `"Ω"` into prefix exponent and unit. */
function splitSuffix(
  suffix: string,
): { exponent: number; unit: string | undefined } | undefined {
  if (suffix === '') return { exponent: 0, unit: undefined };
  // A whole-suffix unit wins over a prefix reading ("S" is siemens, "F" is farad).
  if (UNIT_CANONICAL.has(suffix)) return { exponent: 0, unit: suffix };
  const prefixOnly = PREFIX_EXPONENTS.get(suffix);
  if (prefixOnly !== undefined) return { exponent: prefixOnly, unit: undefined };
  // Every accepted prefix is a single UTF-16 code unit.
  const prefix = PREFIX_EXPONENTS.get(suffix.charAt(0));
  const rest = suffix.slice(1);
  if (prefix !== undefined && UNIT_CANONICAL.has(rest)) return { exponent: prefix, unit: rest };
  return undefined;
}

/**
 * Parses an SI quantity into its value in SI units.
 *
 * Accepts a finite number (returned unchanged) or a string made of a decimal number
 * (optionally with exponent), optional white space, an optional SI prefix
 * (`y z a f p n u µ μ m k M G T`) and an optional unit symbol (`V A W Ohm ohm Ω H F Hz s S C J`).
 * Examples: `"4.7 uH"` → 4.7e-6, `"10 mΩ"` → 0.01, `"2 k"` → 2000, `"1.5e-3 A"` → 0.0015.
 *
 * Never throws and never yields NaN or an infinite value: empty strings, malformed numbers,
 * `"NaN"`, `"Infinity"`, unknown units and values that overflow (`"1e999"`) or underflow to
 * zero are reported as `{ ok: false, message }`.
 *
 * @param input - The quantity, as a number or a string.
 * @param expectedUnit - If given (any accepted spelling, e.g. `"Ohm"` or `"Ω"`), a string that
 *   carries a different unit is rejected with a message naming both units. A string without a
 *   unit is taken to be in the expected unit.
 * @returns The value in SI units, or a human-readable reason for rejecting the input.
 */
export function parseQuantity(input: number | string, expectedUnit?: string): ParseResult {
  if (typeof input === 'number') {
    return Number.isFinite(input)
      ? { ok: true, value: input }
      : { ok: false, message: `expected a finite number, received ${String(input)}` };
  }
  if (typeof input !== 'string') {
    return { ok: false, message: `expected a number or a string, received ${typeof input}` };
  }
  const shown = JSON.stringify(input);
  let expectedCanonical: string | undefined;
  if (expectedUnit !== undefined) {
    expectedCanonical = canonicalUnit(expectedUnit);
    if (expectedCanonical === undefined) {
      return {
        ok: false,
        message: `cannot check ${shown}: expected unit ${JSON.stringify(expectedUnit)} is not a known unit`,
      };
    }
  }
  const text = input.trim();
  if (text === '') return { ok: false, message: 'expected a quantity such as "4.7 uH", received an empty string' };
  const match = QUANTITY_PATTERN.exec(text);
  if (match === null) {
    return { ok: false, message: `${shown} is not a quantity; expected a number with an optional SI prefix and unit, such as "4.7 uH"` };
  }
  const sign = match[1] === '' || match[1] === '+' ? '' : '-';
  const mantissa = match[2] ?? '';
  const exponentText = match[3] ?? '0';
  const suffix = match[4] ?? '';
  const split = splitSuffix(suffix);
  if (split === undefined) {
    return {
      ok: false,
      message: `${shown}: unknown prefix or unit ${JSON.stringify(suffix)}; units are V, A, W, Ohm (Ω), H, F, Hz, s, S, C, J with SI prefixes y z a f p n u µ m k M G T`,
    };
  }
  if (expectedCanonical !== undefined && split.unit !== undefined) {
    const receivedCanonical = canonicalUnit(split.unit);
    if (receivedCanonical !== expectedCanonical) {
      return {
        ok: false,
        message: `${shown}: expected a value in ${expectedUnit ?? ''}, received one in ${split.unit}`,
      };
    }
  }
  // Build one decimal literal so the result is correctly rounded (no extra multiplication).
  const exponent = Number.parseInt(exponentText, 10) + split.exponent;
  const value = Number(`${sign}${mantissa}e${exponent}`);
  if (!Number.isFinite(value)) {
    return { ok: false, message: `${shown} is out of range (not representable as a finite number)` };
  }
  if (value === 0 && /[1-9]/.test(mantissa)) {
    return { ok: false, message: `${shown} is out of range (too small, it would round to zero)` };
  }
  return { ok: true, value };
}

/**
 * Formats a value with an engineering prefix, e.g. `formatQuantity(4.7e-6, 'H')` → `"4.7 uH"`.
 *
 * The mantissa is rounded to `digits` significant digits, trailing zeros are dropped and the
 * prefix is chosen so that the mantissa lies in [1, 1000) where possible (prefixes from `y`
 * to `T`; ASCII `u` for micro). Beyond that range the mantissa is written with an exponent
 * (`1e15` V → `"1e3 TV"`). The output is accepted by {@link parseQuantity}, which gives
 * back the decimal it printed, i.e. the value to within half a unit in the last printed digit
 * (and exactly, for `digits` = 17). Zero prints as `"0 V"`;
 * non-finite values print as `"NaN V"`, `"Infinity V"` (which do not parse).
 *
 * @param value - Value in SI units.
 * @param unit - Unit symbol appended after the prefix; may be empty.
 * @param digits - Significant digits, an integer from 1 to 17 (default 4).
 * @throws RangeError if `digits` is not an integer from 1 to 17.
 */
export function formatQuantity(value: number, unit: string, digits = 4): string {
  if (!Number.isInteger(digits) || digits < 1 || digits > 17) {
    throw new RangeError(`formatQuantity: digits must be an integer from 1 to 17, received ${digits}`);
  }
  const join = (mantissa: string, prefix: string): string =>
    prefix === '' && unit === '' ? mantissa : `${mantissa} ${prefix}${unit}`;
  if (!Number.isFinite(value)) return join(String(value), '');
  if (value === 0) return join('0', '');
  // Round in decimal (toExponential is exact decimal rounding of the binary value), then move
  // the decimal point as text, so that no binary arithmetic disturbs the printed digits.
  const rounded = Math.abs(value).toExponential(digits - 1);
  const ePos = rounded.indexOf('e');
  const significand = rounded.slice(0, ePos).replace('.', '');
  const decimalExponent = Number(rounded.slice(ePos + 1));
  const exponent = Math.min(
    MAX_OUTPUT_EXPONENT,
    Math.max(MIN_OUTPUT_EXPONENT, Math.floor(decimalExponent / 3) * 3),
  );
  const shift = decimalExponent - exponent; // 0..2 unless the prefix range ran out
  let mantissa: string;
  if (shift >= 0 && shift <= 2) {
    const intDigits = significand.slice(0, shift + 1).padEnd(shift + 1, '0');
    const fraction = significand.slice(shift + 1).replace(/0+$/, '');
    mantissa = fraction === '' ? intDigits : `${intDigits}.${fraction}`;
  } else {
    const fraction = significand.slice(1).replace(/0+$/, '');
    mantissa = `${significand.charAt(0)}${fraction === '' ? '' : `.${fraction}`}e${shift}`;
  }
  const prefix = OUTPUT_PREFIXES[(exponent - MIN_OUTPUT_EXPONENT) / 3] ?? '';
  return join(value < 0 ? `-${mantissa}` : mantissa, prefix);
}
