/**
 * Small dense linear algebra used by the analyses: row-major real matrices as Float64Array and
 * complex matrices as pairs of Float64Array (real and imaginary parts). Sizes are a handful of
 * states, so plain loops beat any setup cost.
 */
import { EigenvalueDecomposition, LuDecomposition, Matrix } from 'ml-matrix';

/** Complex number. */
export interface Complex {
  readonly re: number;
  readonly im: number;
}

/** C = A (r x k) * B (k x c), row-major. */
export function matmul(a: Float64Array, b: Float64Array, r: number, k: number, c: number): Float64Array {
  const out = new Float64Array(r * c);
  for (let i = 0; i < r; i++) {
    for (let p = 0; p < k; p++) {
      const x = a[i * k + p]!;
      if (x === 0) continue;
      for (let j = 0; j < c; j++) out[i * c + j]! += x * b[p * c + j]!;
    }
  }
  return out;
}

/** y = A (r x c) x. */
export function matvec(a: Float64Array, x: ArrayLike<number>, r: number, c: number): Float64Array {
  const y = new Float64Array(r);
  for (let i = 0; i < r; i++) {
    let s = 0;
    for (let j = 0; j < c; j++) s += a[i * c + j]! * x[j]!;
    y[i] = s;
  }
  return y;
}

function toMatrix(a: Float64Array, n: number, c = n): Matrix {
  const m = new Matrix(n, c);
  for (let i = 0; i < n; i++) for (let j = 0; j < c; j++) m.set(i, j, a[i * c + j]!);
  return m;
}

/**
 * Solves A X = B (A n x n, B n x c). Returns null when A is singular to working precision
 * (reciprocal condition estimate from the LU pivots below 1e-14).
 */
export function solveReal(a: Float64Array, b: Float64Array, n: number, c: number): Float64Array | null {
  const lu = new LuDecomposition(toMatrix(a, n));
  let maxPiv = 0, minPiv = Infinity;
  const U = lu.upperTriangularMatrix;
  for (let i = 0; i < n; i++) {
    const p = Math.abs(U.get(i, i));
    maxPiv = Math.max(maxPiv, p);
    minPiv = Math.min(minPiv, p);
  }
  if (!(minPiv > 1e-14 * maxPiv) || maxPiv === 0) return null;
  const x = lu.solve(toMatrix(b, n, c));
  const out = new Float64Array(n * c);
  for (let i = 0; i < n; i++) for (let j = 0; j < c; j++) out[i * c + j] = x.get(i, j);
  return out;
}

/** Eigenvalues of a real n x n matrix (ml-matrix EigenvalueDecomposition). */
export function eigenvalues(a: Float64Array, n: number): Complex[] {
  if (n === 0) return [];
  const e = new EigenvalueDecomposition(toMatrix(a, n));
  const re = e.realEigenvalues, im = e.imaginaryEigenvalues;
  return re.map((r, i) => ({ re: r, im: im[i]! }));
}

/** Complex matrix, row-major, split real and imaginary parts. */
export interface CMat {
  readonly re: Float64Array;
  readonly im: Float64Array;
  readonly rows: number;
  readonly cols: number;
}

export function czeros(rows: number, cols: number): CMat {
  return { re: new Float64Array(rows * cols), im: new Float64Array(rows * cols), rows, cols };
}

/**
 * Solves the complex system A x = b by Gaussian elimination with partial pivoting (A n x n,
 * b n x c). Returns null when a pivot vanishes relative to the largest entry of A.
 */
export function csolve(A: CMat, B: CMat): CMat | null {
  const n = A.rows, c = B.cols;
  const ar = new Float64Array(A.re), ai = new Float64Array(A.im);
  const br = new Float64Array(B.re), bi = new Float64Array(B.im);
  let scale = 0;
  for (let i = 0; i < n * n; i++) scale = Math.max(scale, Math.hypot(ar[i]!, ai[i]!));
  for (let k = 0; k < n; k++) {
    let p = k, best = -1;
    for (let i = k; i < n; i++) {
      const m = Math.hypot(ar[i * n + k]!, ai[i * n + k]!);
      if (m > best) {
        best = m;
        p = i;
      }
    }
    if (!(best > 1e-15 * scale)) return null;
    if (p !== k) {
      for (let j = 0; j < n; j++) {
        const t1 = ar[k * n + j]!, t2 = ai[k * n + j]!;
        ar[k * n + j] = ar[p * n + j]!;
        ai[k * n + j] = ai[p * n + j]!;
        ar[p * n + j] = t1;
        ai[p * n + j] = t2;
      }
      for (let j = 0; j < c; j++) {
        const t1 = br[k * c + j]!, t2 = bi[k * c + j]!;
        br[k * c + j] = br[p * c + j]!;
        bi[k * c + j] = bi[p * c + j]!;
        br[p * c + j] = t1;
        bi[p * c + j] = t2;
      }
    }
    const pr = ar[k * n + k]!, pi = ai[k * n + k]!;
    const den = pr * pr + pi * pi;
    for (let i = k + 1; i < n; i++) {
      const xr = ar[i * n + k]!, xi = ai[i * n + k]!;
      if (xr === 0 && xi === 0) continue;
      // f = a_ik / a_kk
      const fr = (xr * pr + xi * pi) / den, fi = (xi * pr - xr * pi) / den;
      for (let j = k; j < n; j++) {
        const yr = ar[k * n + j]!, yi = ai[k * n + j]!;
        ar[i * n + j]! -= fr * yr - fi * yi;
        ai[i * n + j]! -= fr * yi + fi * yr;
      }
      for (let j = 0; j < c; j++) {
        const yr = br[k * c + j]!, yi = bi[k * c + j]!;
        br[i * c + j]! -= fr * yr - fi * yi;
        bi[i * c + j]! -= fr * yi + fi * yr;
      }
    }
  }
  const X = czeros(n, c);
  for (let j = 0; j < c; j++) {
    for (let i = n - 1; i >= 0; i--) {
      let sr = br[i * c + j]!, si = bi[i * c + j]!;
      for (let k = i + 1; k < n; k++) {
        const yr = ar[i * n + k]!, yi = ai[i * n + k]!;
        const zr = X.re[k * c + j]!, zi = X.im[k * c + j]!;
        sr -= yr * zr - yi * zi;
        si -= yr * zi + yi * zr;
      }
      const pr = ar[i * n + i]!, pi = ai[i * n + i]!;
      const den = pr * pr + pi * pi;
      X.re[i * c + j] = (sr * pr + si * pi) / den;
      X.im[i * c + j] = (si * pr - sr * pi) / den;
    }
  }
  return X;
}

/** Magnitude in dB and phase in degrees of a complex value. */
export function bode(z: Complex): { magnitudeDb: number; phaseDeg: number } {
  return { magnitudeDb: 20 * Math.log10(Math.hypot(z.re, z.im)), phaseDeg: (Math.atan2(z.im, z.re) * 180) / Math.PI };
}

/** Wraps a phase difference into (-180, 180] degrees. */
export function wrapDeg(d: number): number {
  let x = d % 360;
  if (x > 180) x -= 360;
  if (x <= -180) x += 360;
  return x;
}
