/**
 * Dense matrix exponential for the piecewise-linear engine.
 *
 * Method: Pade approximation with scaling and squaring, as in
 *   N. J. Higham (2005), "The scaling and squaring method for the matrix exponential
 *   revisited", SIAM J. Matrix Anal. Appl. 26(4), 1179-1193.
 * Degrees m = 3, 5, 7, 9 are used unscaled when the 1-norm is at most theta_m; otherwise
 * m = 13 with the matrix scaled by 2^-s so that its 1-norm is at most theta_13.
 *
 * For triangular input (this includes diagonal matrices and the augmented matrix of a
 * scalar or upper triangular state matrix) the diagonal and first superdiagonal are recomputed
 * from their closed forms after the Pade step and after every squaring, as proposed in
 *   A. H. Al-Mohy and N. J. Higham (2009), "A new scaling and squaring algorithm for the
 *   matrix exponential", SIAM J. Matrix Anal. Appl. 31(3), 970-989.
 * This keeps slow modes accurate to full precision when a stiff mode forces many squarings.
 * For other matrices the slow modes carry a relative error of order 2^s u, that is about
 * (||A||_1 / theta_13) u, after s squarings.
 *
 * Before scaling, the matrix is balanced by an exact diagonal similarity (powers of two) when
 * that lowers its 1-norm, which avoids needless squarings for badly scaled state matrices
 * (inductor and capacitor rows differ by orders of magnitude).
 *
 * Integrals of the exponential come from the augmented matrix of
 *   C. F. Van Loan (1978), "Computing integrals involving the matrix exponential",
 *   IEEE Trans. Automatic Control 23(3), 395-404.
 *
 * All matrices are dense, row-major, in Float64Array. Scratch storage is kept per size and
 * reused, so repeated calls with the same size allocate nothing except an `out` array when
 * none is passed.
 */

/**
 * theta_m from Higham (2005): the largest 1-norm for which the backward error bound of the
 * degree-m approximant is at most the unit roundoff 2^-53.
 */
const THETA_3 = 1.495585217958292e-2;
const THETA_5 = 2.53939833006323e-1;
const THETA_7 = 9.504178996162932e-1;
const THETA_9 = 2.097847961257068;
const THETA_13 = 5.371920351148152;

/**
 * Numerator coefficients b_0..b_m of the [m/m] Pade approximant to exp, scaled so b_m = 1:
 * b_j = (2m - j)! / (j! (m - j)!), all exact integers in double precision (Higham 2005).
 * The denominator has coefficients (-1)^j b_j.
 * @internal exported for the coefficient check in the tests.
 */
export const PADE_COEFFICIENTS: Readonly<Record<3 | 5 | 7 | 9 | 13, readonly number[]>> = {
  3: [120, 60, 12, 1],
  5: [30240, 15120, 3360, 420, 30, 1],
  7: [17297280, 8648640, 1995840, 277200, 25200, 1512, 56, 1],
  9: [17643225600, 8821612800, 2075673600, 302702400, 30270240, 2162160, 110880, 3960, 90, 1],
  13: [
    64764752532480000, 32382376266240000, 7771770303897600, 1187353796428800, 129060195264000,
    10559470521600, 670442572800, 33522128640, 1323241920, 40840800, 960960, 16380, 182, 1,
  ],
};

/** 1-norm (largest absolute column sum) of an n x n row-major matrix. */
export function norm1(a: Float64Array, n: number): number {
  let best = 0;
  for (let j = 0; j < n; j++) {
    let sum = 0;
    for (let i = 0; i < n; i++) sum += Math.abs(a[i * n + j]);
    if (sum > best || Number.isNaN(sum)) best = sum;
  }
  return best;
}

interface Scratch {
  readonly as: Float64Array; // scaled input
  readonly a2: Float64Array;
  readonly a4: Float64Array;
  readonly a6: Float64Array;
  readonly a8: Float64Array;
  readonly u: Float64Array;
  readonly v: Float64Array;
  readonly w: Float64Array;
  readonly t: Float64Array;
  readonly piv: Int32Array;
  readonly d: Float64Array;
  readonly powers: readonly Float64Array[]; // [a2, a4, a6, a8]
}

const scratchPool = new Map<number, Scratch>();
const augmentedPool = new Map<number, Float64Array>();

function scratchFor(n: number): Scratch {
  let s = scratchPool.get(n);
  if (s === undefined) {
    const nn = n * n;
    const a2 = new Float64Array(nn);
    const a4 = new Float64Array(nn);
    const a6 = new Float64Array(nn);
    const a8 = new Float64Array(nn);
    s = {
      as: new Float64Array(nn),
      a2,
      a4,
      a6,
      a8,
      u: new Float64Array(nn),
      v: new Float64Array(nn),
      w: new Float64Array(nn),
      t: new Float64Array(nn),
      piv: new Int32Array(n),
      d: new Float64Array(n),
      powers: [a2, a4, a6, a8],
    };
    scratchPool.set(n, s);
  }
  return s;
}

/** c = a * b for n x n row-major matrices; c must not alias a or b. */
function matmul(a: Float64Array, b: Float64Array, c: Float64Array, n: number): void {
  c.fill(0, 0, n * n);
  for (let i = 0; i < n; i++) {
    const ri = i * n;
    for (let k = 0; k < n; k++) {
      const aik = a[ri + k];
      if (aik === 0) continue;
      const rk = k * n;
      for (let j = 0; j < n; j++) c[ri + j] += aik * b[rk + j];
    }
  }
}

function isUpperTriangular(a: Float64Array, n: number): boolean {
  for (let i = 1; i < n; i++) {
    for (let j = 0; j < i; j++) if (a[i * n + j] !== 0) return false;
  }
  return true;
}

function isLowerTriangular(a: Float64Array, n: number): boolean {
  for (let i = 0; i < n; i++) {
    for (let j = i + 1; j < n; j++) if (a[i * n + j] !== 0) return false;
  }
  return true;
}

function transposeInto(a: Float64Array, x: Float64Array, n: number): void {
  for (let i = 0; i < n; i++) for (let j = 0; j < n; j++) x[j * n + i] = a[i * n + j];
}

/** Divided difference (e^x - e^y) / (x - y), without cancellation or spurious overflow. */
function expDividedDifference(x: number, y: number): number {
  const d = Math.abs(x - y);
  const hi = Math.max(x, y);
  if (d === 0) return Math.exp(hi);
  // e^hi (1 - e^-d) / d; expm1 keeps full relative accuracy for small d.
  return (Math.exp(hi) * -Math.expm1(-d)) / d;
}

/**
 * For upper triangular t0, overwrite diagonal and first superdiagonal of x = exp(scale t0)
 * with their closed forms (Al-Mohy and Higham 2009): exp(scale t_ii) and
 * scale t_{i,i+1} (e^{l_i} - e^{l_{i+1}}) / (l_i - l_{i+1}).
 */
function fixTriangular(x: Float64Array, t0: Float64Array, n: number, scale: number): void {
  for (let i = 0; i < n; i++) x[i * n + i] = Math.exp(scale * t0[i * n + i]);
  for (let i = 0; i + 1 < n; i++) {
    const t = scale * t0[i * n + i + 1];
    if (t === 0) {
      x[i * n + i + 1] = 0;
      continue;
    }
    const l1 = scale * t0[i * n + i];
    const l2 = scale * t0[(i + 1) * n + i + 1];
    x[i * n + i + 1] = t * expDividedDifference(l1, l2);
  }
}

/**
 * Solves P X = Q for X (n x n, n right-hand sides) by LU with partial pivoting.
 * P is overwritten with its factors, Q with the solution.
 */
function luSolveInPlace(p: Float64Array, q: Float64Array, n: number, piv: Int32Array): void {
  for (let k = 0; k < n; k++) {
    let pr = k;
    let pmax = Math.abs(p[k * n + k]);
    for (let i = k + 1; i < n; i++) {
      const v = Math.abs(p[i * n + k]);
      if (v > pmax) {
        pmax = v;
        pr = i;
      }
    }
    piv[k] = pr;
    if (pr !== k) {
      for (let j = 0; j < n; j++) {
        const tp = p[k * n + j];
        p[k * n + j] = p[pr * n + j];
        p[pr * n + j] = tp;
        const tq = q[k * n + j];
        q[k * n + j] = q[pr * n + j];
        q[pr * n + j] = tq;
      }
    }
    const pivot = p[k * n + k];
    for (let i = k + 1; i < n; i++) {
      const l = p[i * n + k];
      if (l === 0) continue;
      const f = l / pivot;
      p[i * n + k] = f;
      for (let j = k + 1; j < n; j++) p[i * n + j] -= f * p[k * n + j];
      for (let j = 0; j < n; j++) q[i * n + j] -= f * q[k * n + j];
    }
  }
  // Back substitution, row by row from the bottom.
  for (let i = n - 1; i >= 0; i--) {
    const ri = i * n;
    for (let k = i + 1; k < n; k++) {
      const uik = p[ri + k];
      if (uik === 0) continue;
      const rk = k * n;
      for (let j = 0; j < n; j++) q[ri + j] -= uik * q[rk + j];
    }
    const d = p[ri + i];
    for (let j = 0; j < n; j++) q[ri + j] /= d;
  }
}

function checkSquare(name: string, a: Float64Array, n: number): void {
  if (!Number.isInteger(n) || n < 0) throw new RangeError(`expm: size must be a non-negative integer, got ${n}`);
  if (a.length !== n * n) throw new RangeError(`expm: ${name} has length ${a.length}, expected ${n * n}`);
}

function overlaps(x: Float64Array, y: Float64Array): boolean {
  if (x.buffer !== y.buffer) return false;
  const x0 = x.byteOffset;
  const x1 = x0 + x.byteLength;
  const y0 = y.byteOffset;
  const y1 = y0 + y.byteLength;
  return x0 < y1 && y0 < x1;
}

/**
 * Diagonal similarity by powers of two, B = D^-1 A D, reducing row and column norms toward
 * each other (Parlett and Reinsch, 1969, "Balancing a matrix for calculation of eigenvalues
 * and eigenvectors", Numer. Math. 13, 293-304; radix 2, no permutations). Exact in floating
 * point barring underflow. Overwrites x with B and d with the diagonal of D.
 */
function balance(x: Float64Array, n: number, d: Float64Array): void {
  d.fill(1, 0, n);
  for (let sweep = 0; sweep < 64; sweep++) {
    let changed = false;
    for (let i = 0; i < n; i++) {
      let c = 0;
      let r = 0;
      for (let j = 0; j < n; j++) {
        if (j === i) continue;
        c += Math.abs(x[j * n + i]);
        r += Math.abs(x[i * n + j]);
      }
      if (c === 0 || r === 0 || !Number.isFinite(c + r)) continue;
      const total = c + r;
      let f = 1;
      let cc = c;
      const lo = r / 2;
      while (cc < lo && f < 2 ** 500) {
        f *= 2;
        cc *= 4;
      }
      const hi = r * 2;
      while (cc >= hi && f > 2 ** -500) {
        f /= 2;
        cc /= 4;
      }
      // New column sum c f, new row sum r / f.
      if (f !== 1 && c * f + r / f < 0.95 * total) {
        changed = true;
        d[i] *= f;
        const g = 1 / f;
        for (let j = 0; j < n; j++) {
          x[i * n + j] *= g;
          x[j * n + i] *= f;
        }
      }
    }
    if (!changed) break;
  }
}

/** expm(A) for an n x n row-major matrix; writes into `out` when given (must not alias `a`). */
export function expm(a: Float64Array, n: number, out?: Float64Array): Float64Array {
  checkSquare('input', a, n);
  const res = out ?? new Float64Array(n * n);
  if (out !== undefined) {
    checkSquare('out', out, n);
    if (overlaps(out, a)) throw new RangeError('expm: out must not alias the input');
  }
  if (n === 0) return res;

  let nrm = norm1(a, n);
  if (!Number.isFinite(nrm)) {
    res.fill(Number.NaN);
    return res;
  }

  const sc = scratchFor(n);
  const nn = n * n;
  const x = sc.as;
  const d = sc.d;
  // Lower triangular input is handled through exp(A^T) = exp(A)^T.
  const upper = isUpperTriangular(a, n);
  const transposed = !upper && isLowerTriangular(a, n);
  const triangular = upper || transposed;
  if (transposed) transposeInto(a, x, n);
  else x.set(a);
  let balanced = false;
  if (n > 1) {
    balance(x, n, d);
    const nb = norm1(x, n);
    if (nb < nrm) {
      balanced = true;
      nrm = nb;
    } else if (transposed) transposeInto(a, x, n);
    else x.set(a);
  }

  let m: 3 | 5 | 7 | 9 | 13;
  let s = 0;
  if (nrm <= THETA_3) m = 3;
  else if (nrm <= THETA_5) m = 5;
  else if (nrm <= THETA_7) m = 7;
  else if (nrm <= THETA_9) m = 9;
  else {
    m = 13;
    s = Math.max(0, Math.ceil(Math.log2(nrm / THETA_13)));
  }
  const b = PADE_COEFFICIENTS[m];

  if (s > 0) {
    const scale = 2 ** -s;
    for (let i = 0; i < nn; i++) x[i] *= scale;
  }

  const { a2, a4, a6, a8, u, v, w, t } = sc;
  matmul(x, x, a2, n);
  if (m >= 5) matmul(a2, a2, a4, n);
  if (m >= 7) matmul(a4, a2, a6, n);
  if (m === 9) matmul(a4, a4, a8, n);

  if (m === 13) {
    // U = A [A6 (b13 A6 + b11 A4 + b9 A2) + b7 A6 + b5 A4 + b3 A2 + b1 I]
    for (let i = 0; i < nn; i++) t[i] = b[13] * a6[i] + b[11] * a4[i] + b[9] * a2[i];
    matmul(a6, t, w, n);
    for (let i = 0; i < nn; i++) w[i] += b[7] * a6[i] + b[5] * a4[i] + b[3] * a2[i];
    for (let i = 0; i < n; i++) w[i * n + i] += b[1];
    matmul(x, w, u, n);
    // V = A6 (b12 A6 + b10 A4 + b8 A2) + b6 A6 + b4 A4 + b2 A2 + b0 I
    for (let i = 0; i < nn; i++) t[i] = b[12] * a6[i] + b[10] * a4[i] + b[8] * a2[i];
    matmul(a6, t, v, n);
    for (let i = 0; i < nn; i++) v[i] += b[6] * a6[i] + b[4] * a4[i] + b[2] * a2[i];
    for (let i = 0; i < n; i++) v[i * n + i] += b[0];
  } else {
    // U = A sum_k b_{2k+1} A^{2k},  V = sum_k b_{2k} A^{2k}
    const pw = sc.powers;
    w.fill(0, 0, nn);
    v.fill(0, 0, nn);
    for (let i = 0; i < n; i++) {
      w[i * n + i] = b[1];
      v[i * n + i] = b[0];
    }
    for (let k = 1; 2 * k <= m; k++) {
      const p = pw[k - 1];
      const be = b[2 * k];
      const bo = b[2 * k + 1];
      for (let i = 0; i < nn; i++) {
        v[i] += be * p[i];
        w[i] += bo * p[i];
      }
    }
    matmul(x, w, u, n);
  }

  // (V - U) R = (V + U); the parity choice makes the last squaring land in `res`.
  let cur = s % 2 === 0 ? res : t;
  let other = s % 2 === 0 ? t : res;
  for (let i = 0; i < nn; i++) {
    w[i] = v[i] - u[i];
    cur[i] = v[i] + u[i];
  }
  luSolveInPlace(w, cur, n, sc.piv);
  if (triangular) fixTriangular(cur, x, n, 1);
  for (let k = 1; k <= s; k++) {
    matmul(cur, cur, other, n);
    const tmp = cur;
    cur = other;
    other = tmp;
    if (triangular) fixTriangular(cur, x, n, 2 ** k);
  }
  if (balanced) {
    for (let i = 0; i < n; i++) {
      const di = d[i];
      for (let j = 0; j < n; j++) cur[i * n + j] *= di / d[j];
    }
  }
  if (transposed) {
    for (let i = 1; i < n; i++) {
      for (let j = 0; j < i; j++) {
        const tmp = cur[i * n + j];
        cur[i * n + j] = cur[j * n + i];
        cur[j * n + i] = tmp;
      }
    }
  }
  return cur;
}

/**
 * exp(M h) for the Van Loan augmented matrix: given A (nx x nx) and B (nx x nu), returns the
 * (nx+nu)x(nx+nu) row-major matrix [[Phi, Gamma],[0, I]] with Phi = expm(A h),
 * Gamma = integral_0^h expm(A s) ds B (Van Loan, 1978).
 *
 * Gamma is linear in B, so the B block is scaled by an exact power of two 2^-k before the
 * exponential (so that it does not raise the 1-norm above that of A h) and Gamma is scaled
 * back by 2^k afterwards. A large B therefore does not force extra squarings, which would
 * cost accuracy in Phi and Gamma.
 */
export function expmAugmented(
  a: Float64Array,
  b: Float64Array,
  nx: number,
  nu: number,
  h: number,
  out?: Float64Array,
): Float64Array {
  if (!Number.isInteger(nx) || nx < 0 || !Number.isInteger(nu) || nu < 0) {
    throw new RangeError(`expmAugmented: sizes must be non-negative integers, got nx=${nx}, nu=${nu}`);
  }
  if (a.length !== nx * nx) throw new RangeError(`expmAugmented: A has length ${a.length}, expected ${nx * nx}`);
  if (b.length !== nx * nu) throw new RangeError(`expmAugmented: B has length ${b.length}, expected ${nx * nu}`);
  if (!Number.isFinite(h)) throw new RangeError(`expmAugmented: step must be finite, got ${h}`);
  const n = nx + nu;
  const res = out ?? new Float64Array(n * n);
  if (res.length !== n * n) throw new RangeError(`expmAugmented: out has length ${res.length}, expected ${n * n}`);
  if (overlaps(res, a) || overlaps(res, b)) throw new RangeError('expmAugmented: out must not alias A or B');

  // 1-norms of the two blocks of the first block row.
  let normA = 0;
  for (let j = 0; j < nx; j++) {
    let sum = 0;
    for (let i = 0; i < nx; i++) sum += Math.abs(a[i * nx + j] * h);
    if (sum > normA || Number.isNaN(sum)) normA = sum;
  }
  let normB = 0;
  for (let j = 0; j < nu; j++) {
    let sum = 0;
    for (let i = 0; i < nx; i++) sum += Math.abs(b[i * nu + j] * h);
    if (sum > normB || Number.isNaN(sum)) normB = sum;
  }
  const target = Math.max(normA, THETA_3);
  const k = Number.isFinite(normB) && normB > target ? Math.ceil(Math.log2(normB / target)) : 0;
  const down = 2 ** -k;
  const up = 2 ** k;

  let m = augmentedPool.get(n);
  if (m === undefined) {
    m = new Float64Array(n * n);
    augmentedPool.set(n, m);
  }
  m.fill(0);
  for (let i = 0; i < nx; i++) {
    for (let j = 0; j < nx; j++) m[i * n + j] = a[i * nx + j] * h;
    for (let j = 0; j < nu; j++) m[i * n + nx + j] = b[i * nu + j] * h * down;
  }

  expm(m, n, res);

  for (let i = 0; i < nx; i++) {
    for (let j = 0; j < nu; j++) res[i * n + nx + j] *= up;
  }
  // The last nu rows are exactly [0, I] in exact arithmetic; make them so.
  for (let i = nx; i < n; i++) {
    for (let j = 0; j < n; j++) res[i * n + j] = i === j ? 1 : 0;
  }
  return res;
}
