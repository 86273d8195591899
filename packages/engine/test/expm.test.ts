import { describe, it, expect } from 'vitest';
import fc from 'fast-check';
import { expm, expmAugmented, norm1, PADE_COEFFICIENTS } from '../src/expm.ts';
import { taylorOrder, taylorOrderBounds, taylorOrderByTerms } from '../src/simulator.ts';

/** |x - ref| / |ref| */
function rel(x: number, ref: number): number {
  return Math.abs(x - ref) / Math.abs(ref);
}

/** max |x_i - ref_i| / max |ref_i| (normwise relative error in the max norm) */
function normRel(x: ArrayLike<number>, ref: ArrayLike<number>): number {
  let num = 0;
  let den = 0;
  for (let i = 0; i < ref.length; i++) {
    num = Math.max(num, Math.abs(x[i] - ref[i]));
    den = Math.max(den, Math.abs(ref[i]));
  }
  return num / den;
}

function mat(rows: number[][]): Float64Array {
  return Float64Array.from(rows.flat());
}

function matmul(a: Float64Array, b: Float64Array, n: number): Float64Array {
  const c = new Float64Array(n * n);
  for (let i = 0; i < n; i++)
    for (let k = 0; k < n; k++) for (let j = 0; j < n; j++) c[i * n + j] += a[i * n + k] * b[k * n + j];
  return c;
}

function scaled(a: Float64Array, f: number): Float64Array {
  return a.map((v) => v * f);
}

function identity(n: number): Float64Array {
  const e = new Float64Array(n * n);
  for (let i = 0; i < n; i++) e[i * n + i] = 1;
  return e;
}

/**
 * Closed form of exp(A t) for a real 2x2 A with eigenvalues -sigma +- i wd (wd > 0):
 * exp(A t) = e^{-sigma t} [cos(wd t) I + sin(wd t) / wd (A + sigma I)]
 * (Cayley-Hamilton; from memory, checked against the rotation case sigma = 0).
 */
function expUnderdamped2(a: Float64Array, t: number): Float64Array {
  const sigma = -(a[0] + a[3]) / 2;
  const det = a[0] * a[3] - a[1] * a[2];
  const wd = Math.sqrt(det - sigma * sigma);
  const e = Math.exp(-sigma * t);
  const c = Math.cos(wd * t);
  const s = Math.sin(wd * t) / wd;
  return Float64Array.from([
    e * (c + s * (a[0] + sigma)),
    e * s * a[1],
    e * s * a[2],
    e * (c + s * (a[3] + sigma)),
  ]);
}

function factorial(k: number): bigint {
  let f = 1n;
  for (let i = 2n; i <= BigInt(k); i++) f *= i;
  return f;
}

describe('norm1', () => {
  it('is the largest absolute column sum', () => {
    // by hand: column sums 1+3 = 4 and 2+4 = 6
    expect(norm1(mat([[1, -2], [-3, 4]]), 2)).toBe(6);
    expect(norm1(new Float64Array(0), 0)).toBe(0);
  });
});

describe('Pade coefficients', () => {
  it('equal (2m - j)! / (j! (m - j)!) exactly, the [m/m] numerator scaled so b_m = 1 (Higham 2005)', () => {
    for (const m of [3, 5, 7, 9, 13] as const) {
      const b = PADE_COEFFICIENTS[m];
      expect(b.length).toBe(m + 1);
      for (let j = 0; j <= m; j++) {
        const exact = factorial(2 * m - j) / (factorial(j) * factorial(m - j));
        // exact integer arithmetic: the [m/m] Pade numerator coefficient of Higham (2005), rescaled
        expect(BigInt(b[j])).toBe(exact);
      }
    }
    // m = 13 values as printed in Higham (2005)
    expect(PADE_COEFFICIENTS[13][0]).toBe(64764752532480000);
    expect(PADE_COEFFICIENTS[13][6]).toBe(670442572800);
  });
});

describe('expm: closed forms', () => {
  it('maps the zero matrix to the identity, exactly', () => {
    for (let n = 1; n <= 6; n++) {
      // closed form: exp(0) = I
      expect(Array.from(expm(new Float64Array(n * n), n))).toEqual(Array.from(identity(n)));
    }
    expect(expm(new Float64Array(0), 0).length).toBe(0);
  });

  it('maps a diagonal matrix to the exponentials of its entries', () => {
    for (const d of [
      [0.01, -0.005],
      [0.2, -0.1, 0.05],
      [0.9, -0.7],
      [2, -1.5, 0.3],
      [5, -4],
      [50, -20, 1e-3],
      [-700, -1e-9, 3],
    ]) {
      const n = d.length;
      const a = new Float64Array(n * n);
      d.forEach((v, i) => (a[i * n + i] = v));
      const e = expm(a, n);
      for (let i = 0; i < n; i++) {
        for (let j = 0; j < n; j++) {
          if (i === j) expect(rel(e[i * n + i], Math.exp(d[i]))).toBeLessThanOrEqual(2.3e-16); // closed form e^{d_i}
          else expect(e[i * n + j]).toBe(0); // closed form: off-diagonal stays 0
        }
      }
    }
  });

  it('gives a rotation for the generator [[0, -w], [w, 0]] t', () => {
    // each value of w t selects a different Pade degree or number of squarings
    const cases: [number, number][] = [
      [0.01, 2e-16], // m = 3
      [0.1, 4e-16], // m = 5
      [0.9, 4e-16], // m = 7
      [2, 4e-16], // m = 9
      [3, 4e-16], // m = 13, no scaling
      [5, 1e-15], // m = 13, no scaling
      [100, 1e-14], // m = 13, 5 squarings
    ];
    for (const [wt, tol] of cases) {
      const e = expm(mat([[0, -wt], [wt, 0]]), 2);
      const c = Math.cos(wt);
      const s = Math.sin(wt);
      // closed form: [[cos wt, -sin wt], [sin wt, cos wt]]
      expect(normRel(e, [c, -s, s, c])).toBeLessThanOrEqual(tol);
    }
  });

  it('gives cosh and sinh for the symmetric generator [[a, b], [b, a]] in every Pade degree', () => {
    const cases: [number, number, number][] = [
      [0.004, 0.008, 1e-15], // m = 3
      [0.1, -0.12, 1e-15], // m = 5
      [-0.3, 0.6, 1e-15], // m = 7
      [1, 1, 1e-15], // m = 9
      [-2, 2.5, 1e-15], // m = 13, no scaling
      // m = 13, 2 squarings; observed 5.0e-15: the Pade step is good to 1.2e-15 relative on
      // the surviving mode e^{-3}, and each squaring doubles that
      [-10, 7, 1e-14],
    ];
    for (const [a, b, tol] of cases) {
      const e = expm(mat([[a, b], [b, a]]), 2);
      // closed form: e^a [[cosh b, sinh b], [sinh b, cosh b]]
      const ch = Math.exp(a) * Math.cosh(b);
      const sh = Math.exp(a) * Math.sinh(b);
      expect(rel(e[0], ch)).toBeLessThanOrEqual(tol);
      expect(rel(e[3], ch)).toBeLessThanOrEqual(tol);
      expect(rel(e[1], sh)).toBeLessThanOrEqual(tol);
      expect(rel(e[2], sh)).toBeLessThanOrEqual(tol);
    }
  });

  it('gives the polynomial for a nilpotent Jordan block, its transpose and a permutation of it', () => {
    const n = 3;
    for (const [t, tolPermuted] of [
      [0.5, 1e-15],
      [3, 1e-15],
      // 8 squarings of a strongly non-normal matrix; observed 2.7e-12 (see report of limits)
      [1000, 1e-11],
    ]) {
      // closed form: exp(N t) = I + N t + N^2 t^2 / 2 for the shift N
      const ref = [1, t, (t * t) / 2, 0, 1, t, 0, 0, 1];
      const upper = expm(mat([[0, t, 0], [0, 0, t], [0, 0, 0]]), n);
      expect(normRel(upper, ref)).toBeLessThanOrEqual(1e-15);
      expect(rel(upper[2], (t * t) / 2)).toBeLessThanOrEqual(1e-15);
      const lower = expm(mat([[0, 0, 0], [t, 0, 0], [0, t, 0]]), n);
      // closed form: transpose of the above
      expect(normRel(lower, [1, 0, 0, t, 1, 0, (t * t) / 2, t, 1])).toBeLessThanOrEqual(1e-15);
      // states reordered (1, 0, 2): neither upper nor lower triangular
      const permuted = expm(mat([[0, 0, t], [t, 0, 0], [0, 0, 0]]), n);
      // closed form: the same entries reordered
      expect(normRel(permuted, [1, 0, t, t, 1, (t * t) / 2, 0, 0, 1])).toBeLessThanOrEqual(tolPermuted);
    }
  });

  it('matches the underdamped second-order response for [[0, 1], [-w0^2, -2 zeta w0]]', () => {
    const cases: [number, number, number, number][] = [
      // w0, zeta, t, tolerance
      [3, 0.2, 0.5, 1e-15],
      [3, 0.2, 2, 2e-15],
      [1, 0.05, 30, 4e-15],
      // badly scaled: entries 1 and 1e8; balancing keeps this accurate
      [1e4, 0.05, 1e-3, 1e-14],
    ];
    for (const [w0, zeta, t, tol] of cases) {
      const a = mat([[0, 1], [-w0 * w0, -2 * zeta * w0]]);
      const e = expm(scaled(a, t), 2);
      // closed form of the underdamped second-order response, see expUnderdamped2
      const ref = expUnderdamped2(a, t);
      expect(normRel(e, ref)).toBeLessThanOrEqual(tol);
      // the column scaling makes the max-norm comparison blind to one column; check it alone
      expect(Math.abs(e[1] - ref[1]) / Math.abs(ref[1])).toBeLessThanOrEqual(50 * tol);
    }
  });
});

describe('expm: stiff matrices', () => {
  it('keeps the slow mode of diag(-1e10, -1) h, h = 1e-6, to full precision', () => {
    const h = 1e-6;
    const e = expm(mat([[-1e10 * h, 0], [0, -1 * h]]), 2);
    expect(e[0]).toBe(0); // closed form exp(-1e4), which underflows to 0
    expect(rel(e[3], Math.exp(-1e-6))).toBeLessThanOrEqual(1e-15); // closed form exp(-1e-6)
    expect(e[1]).toBe(0);
    expect(e[2]).toBe(0);
  });

  it('keeps the coupling term of a stiff upper triangular matrix accurate', () => {
    const l1 = -1e4;
    const l2 = -1e-6;
    const c = 3;
    const e = expm(mat([[l1, c], [0, l2]]), 2);
    // closed form: off-diagonal c (e^{l1} - e^{l2}) / (l1 - l2)
    const ref = (c * (Math.exp(l1) - Math.exp(l2))) / (l1 - l2);
    expect(rel(e[1], ref)).toBeLessThanOrEqual(1e-15);
    expect(rel(e[3], Math.exp(l2))).toBeLessThanOrEqual(1e-15); // closed form e^{l2}
  });

  it('loses accuracy like 2^s u on a stiff matrix that is not triangular (documented limit)', () => {
    // [[a, b], [b, a]] has eigenvalues a + b = -1e4 and a - b = -1e-6 (a - b is exact in
    // floating point here); exp = 1/2 [[p + q, p - q], [p - q, p + q]], p = e^{a+b}, q = e^{a-b}.
    const a = (-1e4 + -1e-6) / 2;
    const b = (-1e4 - -1e-6) / 2;
    const q = Math.exp(a - b);
    const p = Math.exp(a + b);
    const e = expm(mat([[a, b], [b, a]]), 2);
    // closed form above; 11 squarings, observed error 8.4e-14, bound about 2^11 u = 2.3e-13
    expect(rel(e[0], (p + q) / 2)).toBeLessThanOrEqual(3e-13);
    expect(rel(e[1], (p - q) / 2)).toBeLessThanOrEqual(3e-13);
  });
});

describe('expmAugmented (Van Loan 1978)', () => {
  it('returns [[e^{ah}, (e^{ah} - 1) b / a], [0, 1]] for scalar A = a, B = b', () => {
    for (const [a, b, h] of [
      [-3, 2, 0.7],
      [2, -5, 0.25],
      [-0.001, 4, 0.01],
      [40, 1, 0.5],
    ]) {
      const m = expmAugmented(Float64Array.of(a), Float64Array.of(b), 1, 1, h);
      expect(rel(m[0], Math.exp(a * h))).toBeLessThanOrEqual(2.3e-16); // closed form e^{ah}
      expect(rel(m[1], (Math.expm1(a * h) * b) / a)).toBeLessThanOrEqual(5e-16); // closed form (e^{ah} - 1) b / a
      expect(m[2]).toBe(0);
      expect(m[3]).toBe(1);
    }
  });

  it('returns Gamma = B h for A = 0', () => {
    // closed form: integral_0^h I ds B = B h
    const m1 = expmAugmented(Float64Array.of(0), Float64Array.of(3), 1, 1, 0.5);
    expect(Array.from(m1)).toEqual([1, 1.5, 0, 1]);
    const m2 = expmAugmented(new Float64Array(4), Float64Array.of(2, -1e6, 7, 0.25), 2, 2, 1e-3);
    const ref = [1, 0, 2e-3, -1e3, 0, 1, 7e-3, 2.5e-4, 0, 0, 1, 0, 0, 0, 0, 1];
    for (let i = 0; i < 16; i++) {
      if (ref[i] === 0) expect(m2[i]).toBe(0);
      else expect(rel(m2[i], ref[i])).toBeLessThanOrEqual(2.3e-16);
    }
  });

  it('gives the step response of a series RL circuit', () => {
    // L di/dt = V - R i, i(0) = 0: A = -R/L, B = 1/L, input V
    const R = 2;
    const L = 1e-3;
    const V = 12;
    for (const h of [1e-5, 1e-4, 5e-3]) {
      const m = expmAugmented(Float64Array.of(-R / L), Float64Array.of(1 / L), 1, 1, h);
      const i = m[1] * V;
      // circuit theory closed form: i(h) = V / R (1 - e^{-R h / L})
      expect(rel(i, (V / R) * -Math.expm1((-R * h) / L))).toBeLessThanOrEqual(1e-15);
      expect(rel(m[0], Math.exp((-R * h) / L))).toBeLessThanOrEqual(2.3e-16); // closed form e^{-R h / L}
    }
  });

  it('gives the step response of a series RLC circuit (two states, not triangular)', () => {
    // states [i_L, v_C]; L di/dt = V - R i - v_C, C dv/dt = i; zero initial state
    const R = 0.1;
    const L = 10e-6;
    const C = 100e-6;
    const V = 12;
    const a = mat([[-R / L, -1 / L], [1 / C, 0]]);
    const b = Float64Array.of(1 / L, 0);
    const sigma = R / (2 * L);
    const wd = Math.sqrt(1 / (L * C) - sigma * sigma);
    // steps where the closed form itself has no cancellation (v_C ~ t^2 for small t)
    for (const h of [20e-6, 50e-6, 500e-6]) {
      const m = expmAugmented(a, b, 2, 1, h);
      const e = Math.exp(-sigma * h);
      // circuit theory closed form of the underdamped step response:
      // i_L = V / (L wd) e^{-sigma t} sin(wd t),
      // v_C = V [1 - e^{-sigma t} (cos(wd t) + sigma / wd sin(wd t))]
      const iRef = (V / (L * wd)) * e * Math.sin(wd * h);
      const vRef = V * (1 - e * (Math.cos(wd * h) + (sigma / wd) * Math.sin(wd * h)));
      expect(rel(m[2] * V, iRef)).toBeLessThanOrEqual(1e-13);
      expect(rel(m[5] * V, vRef)).toBeLessThanOrEqual(1e-13);
      // Phi against the closed form of expUnderdamped2, column by column (columns differ in scale)
      const phi = [m[0], m[1], m[3], m[4]];
      const ref = expUnderdamped2(a, h);
      for (const j of [0, 1]) {
        const col = [phi[j], phi[2 + j]];
        const colRef = [ref[j], ref[2 + j]];
        expect(normRel(col, colRef)).toBeLessThanOrEqual(1e-13);
      }
      expect(Array.from(m.subarray(6, 9))).toEqual([0, 0, 1]);
    }
  });

  it('keeps Gamma = 1 for the stiff scalar A = -1e10, B = 1e10, h = 1e-6', () => {
    const m = expmAugmented(Float64Array.of(-1e10), Float64Array.of(1e10), 1, 1, 1e-6);
    expect(m[0]).toBe(0); // closed form exp(-1e4), which underflows to 0
    expect(rel(m[1], 1)).toBeLessThanOrEqual(1e-14); // closed form 1 - exp(-1e4) = 1 in double
  });

  it('keeps both modes of the stiff diagonal A = diag(-1e10, -1), B = [1e10, 1], h = 1e-6', () => {
    const m = expmAugmented(mat([[-1e10, 0], [0, -1]]), Float64Array.of(1e10, 1), 2, 1, 1e-6);
    expect(rel(m[4], Math.exp(-1e-6))).toBeLessThanOrEqual(1e-15); // closed form exp(-1e-6)
    expect(rel(m[2], 1)).toBeLessThanOrEqual(1e-14); // closed form 1 - exp(-1e4) = 1
    expect(rel(m[5], -Math.expm1(-1e-6))).toBeLessThanOrEqual(1e-15); // closed form 1 - exp(-1e-6)
  });

  it('is not degraded by a large B block (A = -1, B = 1e8, h = 1)', () => {
    const m = expmAugmented(Float64Array.of(-1), Float64Array.of(1e8), 1, 1, 1);
    expect(rel(m[0], Math.exp(-1))).toBeLessThanOrEqual(2.3e-16); // closed form e^{-1}
    expect(rel(m[1], 1e8 * -Math.expm1(-1))).toBeLessThanOrEqual(1e-13); // closed form 1e8 (1 - e^{-1})
  });

  it('is not degraded by a large B block on a non-triangular A', () => {
    // A = [[0, -1], [1, 0]], B = [0, 1e8]^T: integral_0^h exp(A s) ds = [[sin h, cos h - 1], [1 - cos h, sin h]]
    const h = 1;
    const m = expmAugmented(mat([[0, -1], [1, 0]]), Float64Array.of(0, 1e8), 2, 1, h);
    // closed form Gamma = 1e8 [cos h - 1, sin h]
    expect(rel(m[2], 1e8 * (Math.cos(h) - 1))).toBeLessThanOrEqual(1e-15);
    expect(rel(m[5], 1e8 * Math.sin(h))).toBeLessThanOrEqual(1e-15);
    // closed form Phi = rotation by h
    expect(normRel([m[0], m[1], m[3], m[4]], [Math.cos(h), -Math.sin(h), Math.sin(h), Math.cos(h)])).toBeLessThanOrEqual(
      4e-16,
    );
  });
});

describe('expm: properties', () => {
  // uniform entries in [-1, 1] and times in [0, 2] (unbiased, so not dominated by special
  // values), giving 1-norms of A (s + t) up to about 13, i.e. up to 2 squarings
  const entry = fc.noBias(fc.integer({ min: -(2 ** 20), max: 2 ** 20 })).map((k) => k / 2 ** 20);
  const matrix4 = fc.array(entry, { minLength: 16, maxLength: 16 }).map((v) => Float64Array.from(v));
  // upper or lower triangular (the latter goes through the transpose)
  const triangular4 = fc
    .tuple(matrix4, fc.boolean())
    .map(([a, up]) => a.map((v, k) => ((up ? k % 4 < Math.floor(k / 4) : k % 4 > Math.floor(k / 4)) ? 0 : v)));
  const time = fc.noBias(fc.integer({ min: 0, max: 2 ** 20 })).map((k) => k / 2 ** 19);

  /** ||expm(A (s + t)) - expm(A s) expm(A t)||_1 / ||expm(A (s + t))||_1 */
  function semigroupDefect(a: Float64Array, s: number, t: number): number {
    const lhs = expm(scaled(a, s + t), 4);
    const rhs = matmul(expm(scaled(a, s), 4), expm(scaled(a, t), 4), 4);
    return norm1(lhs.map((v, i) => v - rhs[i]), 4) / norm1(lhs, 4);
  }

  it('satisfies expm(A (s + t)) = expm(A s) expm(A t)', () => {
    fc.assert(
      fc.property(matrix4, time, time, (a, s, t) => {
        // exact identity, since A s and A t commute; observed at most 2.8e-15
        expect(semigroupDefect(a, s, t)).toBeLessThanOrEqual(1e-13);
      }),
      { seed: 42, numRuns: 200 },
    );
  });

  it('satisfies the same identity for triangular A (diagonal recomputed in closed form)', () => {
    fc.assert(
      fc.property(triangular4, time, time, (a, s, t) => {
        // exact identity, as above
        expect(semigroupDefect(a, s, t)).toBeLessThanOrEqual(1e-13);
      }),
      { seed: 42, numRuns: 200 },
    );
  });

  it('satisfies expm(A) expm(-A) = I', () => {
    fc.assert(
      fc.property(matrix4, (a) => {
        const p = matmul(expm(a, 4), expm(scaled(a, -1), 4), 4);
        const e = identity(4);
        // exact identity; 1-norm of the residual, observed at most 2.6e-15
        expect(norm1(p.map((v, i) => v - e[i]), 4)).toBeLessThanOrEqual(1e-13);
      }),
      { seed: 42, numRuns: 200 },
    );
  });
});

describe('expm: interface', () => {
  it('writes into out, reuses scratch across sizes without cross-talk, and rejects aliasing', () => {
    const a3 = mat([[0.5, -1, 2], [0.25, -3, 1], [4, 0, -0.5]]);
    const first = expm(a3, 3);
    const out = new Float64Array(9);
    expm(mat([[0, -2], [2, 0]]), 2); // different size in between
    const again = expm(a3, 3, out);
    expect(again).toBe(out);
    expect(Array.from(out)).toEqual(Array.from(first)); // same input, same bits
    expect(() => expm(a3, 3, a3)).toThrow(RangeError);
    expect(() => expm(a3, 2)).toThrow(RangeError);
    const aug = new Float64Array(9);
    expect(expmAugmented(Float64Array.of(-1), Float64Array.of(1, 2), 1, 2, 0.1, aug)).toBe(aug);
  });

  it('returns NaN for non-finite input instead of looping', () => {
    const e = expm(mat([[Number.POSITIVE_INFINITY, 0], [0, 1]]), 2);
    expect(Number.isNaN(e[0])).toBe(true);
  });
});

describe('Taylor order lookup', () => {
  // The simulator looks the order up in a table of bounds found by bisection; the table must
  // give exactly the order its definition gives (the smallest k >= 2 with rho^k / k! < 2e-17,
  // the term built factor by factor: the truncation bound of the Taylor series of exp(A h) for
  // ||A h|| = rho, Moler and Van Loan 2003, "Nineteen dubious ways to compute the exponential
  // of a matrix, twenty-five years later", method 1), at random rho and on both sides of every
  // bound.
  it('equals the order built term by term, everywhere (exact)', () => {
    fc.assert(
      fc.property(fc.double({ min: -64, max: 64, noNaN: true }), (rho) => taylorOrder(rho) === taylorOrderByTerms(rho)),
      { numRuns: 20000 },
    );
    // from any starting order (the simulator starts at the last one it used)
    fc.assert(
      fc.property(fc.double({ min: -64, max: 64, noNaN: true }), fc.integer({ min: 0, max: 45 }), (rho, near) => taylorOrder(rho, near) === taylorOrderByTerms(rho)),
      { numRuns: 20000 },
    );
    const near: number[] = [];
    for (let e = -12; e <= 1; e += 0.01) near.push(10 ** e);
    for (const r of near) {
      expect(taylorOrder(r)).toBe(taylorOrderByTerms(r));
      // the neighbouring doubles of each sample
      const up = r + r * 2 ** -52, down = r - r * 2 ** -53;
      expect(taylorOrder(up)).toBe(taylorOrderByTerms(up));
      expect(taylorOrder(down)).toBe(taylorOrderByTerms(down));
    }
    // each bound is the first double past its order, and the double before it is not
    const b = taylorOrderBounds();
    const bits = new DataView(new ArrayBuffer(8));
    for (let K = 2; K < 40; K++) {
      bits.setFloat64(0, b[K]!);
      bits.setBigUint64(0, bits.getBigUint64(0) - 1n);
      const before = bits.getFloat64(0);
      expect(taylorOrderByTerms(b[K]!)).toBeGreaterThan(K);
      expect(taylorOrderByTerms(before)).toBeLessThanOrEqual(K);
      expect(taylorOrder(b[K]!)).toBe(taylorOrderByTerms(b[K]!));
      expect(taylorOrder(before)).toBe(taylorOrderByTerms(before));
      for (const near of [2, K - 1, K, K + 1, 40]) {
        expect(taylorOrder(b[K]!, near)).toBe(K + 1);
        expect(taylorOrder(before, near)).toBe(K);
      }
    }
    // at the bounds themselves: rho = 0.25 needs 13 terms (0.25^13 / 13! = 2.4e-18, from the definition)
    expect(taylorOrder(0.25)).toBe(13);
    expect(taylorOrder(0)).toBe(1);
  });
});
