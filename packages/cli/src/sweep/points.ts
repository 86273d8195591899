/**
 * Sweep points: a cartesian grid over scenario parameters (last axis fastest) times seeded
 * Monte Carlo samples. Point i is a pure function of the sweep and i, so shards and resumed
 * runs compute identical rows.
 * @module
 */
import { parseQuantity } from '../units.ts';
import { getAt, setAt } from '../pointer.ts';
import type { SweepSpec } from '../scenario/schema.ts';

/** One parameter assignment of a point. */
export interface Assignment {
  readonly path: string;
  readonly value: number | string;
}

/** Column names of the parameter part of a result row. */
export function parameterColumns(sweep: SweepSpec): string[] {
  return [...(sweep.grid ?? []).map((a) => a.path), ...(sweep.monteCarlo?.vary ?? []).map((v) => v.path)];
}

/** Values of each grid axis. */
export function axisValues(sweep: SweepSpec): (number | string)[][] {
  return (sweep.grid ?? []).map((a) => {
    if ('values' in a) return [...a.values];
    const out: number[] = [];
    for (let k = 0; k < a.points; k++) {
      const f = a.points === 1 ? 0 : k / (a.points - 1);
      // Weighted form so that the midpoint of 0.2 and 0.4 is exactly 0.3.
      out.push(a.scale === 'log' ? a.from * (a.to / a.from) ** f : a.points === 1 ? a.from : (a.from * (a.points - 1 - k) + a.to * k) / (a.points - 1));
    }
    return out;
  });
}

/** Number of points of a sweep. */
export function pointCount(sweep: SweepSpec): number {
  return axisValues(sweep).reduce((n, v) => n * v.length, 1) * (sweep.monteCarlo?.samples ?? 1);
}

/** 32-bit mix (a finaliser of the MurmurHash3 family) to derive independent seeds. */
function mix32(h: number): number {
  h ^= h >>> 16;
  h = Math.imul(h, 0x85ebca6b);
  h ^= h >>> 13;
  h = Math.imul(h, 0xc2b2ae35);
  h ^= h >>> 16;
  return h >>> 0;
}

/** Small seeded generator (mulberry32), uniform in [0, 1). */
function generator(seed: number): () => number {
  let a = seed >>> 0;
  return () => {
    a = (a + 0x6d2b79f5) >>> 0;
    let t = a;
    t = Math.imul(t ^ (t >>> 15), t | 1);
    t ^= t + Math.imul(t ^ (t >>> 7), t | 61);
    return ((t ^ (t >>> 14)) >>> 0) / 4294967296;
  };
}

/** The assignments of point `index`. */
export function pointAssignments(sweep: SweepSpec, base: unknown, index: number): Assignment[] {
  const axes = axisValues(sweep);
  const samples = sweep.monteCarlo?.samples ?? 1;
  let g = Math.floor(index / samples);
  const values: (number | string)[] = new Array<number | string>(axes.length);
  for (let a = axes.length - 1; a >= 0; a--) {
    const n = axes[a]!.length;
    values[a] = axes[a]![g % n]!;
    g = Math.floor(g / n);
  }
  const out: Assignment[] = (sweep.grid ?? []).map((ax, a) => ({ path: ax.path, value: values[a]! }));
  const mc = sweep.monteCarlo;
  if (mc !== undefined) {
    const rand = generator(mix32(mix32(mc.seed) ^ mix32(index + 0x9e3779b9)));
    let doc = base;
    for (const a of out) doc = setAt(doc, a.path, a.value);
    for (const v of mc.vary) {
      const nominal = numericAt(doc, v.path);
      let factor: number;
      if ((v.distribution ?? 'uniform') === 'uniform') factor = 1 + v.tolerance * (2 * rand() - 1);
      else {
        // Box-Muller; sigma = tolerance / 3 so that the tolerance is the 3-sigma bound (common practice).
        const u1 = Math.max(rand(), 1e-300);
        const u2 = rand();
        factor = 1 + (v.tolerance / 3) * Math.sqrt(-2 * Math.log(u1)) * Math.cos(2 * Math.PI * u2);
      }
      out.push({ path: v.path, value: nominal * factor });
    }
  }
  return out;
}

/** Numeric value at a pointer (quantity strings are converted to SI); throws an Error. */
export function numericAt(doc: unknown, pointer: string): number {
  const raw = getAt(doc, pointer);
  if (typeof raw !== 'number' && typeof raw !== 'string') throw new Error(`${pointer}: not a number or quantity`);
  const q = parseQuantity(raw);
  if (!q.ok) throw new Error(`${pointer}: ${q.message}`);
  return q.value;
}

/** Applies assignments to the raw scenario. */
export function applyAssignments(base: unknown, assignments: readonly Assignment[]): unknown {
  let doc = base;
  for (const a of assignments) doc = setAt(doc, a.path, a.value);
  return doc;
}
