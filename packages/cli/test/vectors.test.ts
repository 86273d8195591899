/**
 * Every scenario in test-vectors/ runs through the real CLI binary (`run`, or `steady` when the
 * scenario asks for a steady-state analysis) and each expected value is checked against the
 * summary JSON with the tolerance and published source written beside it in the file.
 */
import { readdirSync, readFileSync } from 'node:fs';
import { join } from 'node:path';
import { describe, expect, it, beforeAll } from 'vitest';
import { lookupDotted } from '../src/pointer.ts';
import { ROOT, cli, inBatches, type CliResult } from './helpers.ts';

interface Expectation {
  path: string;
  value: number | string | boolean;
  rtol?: number;
  atol?: number;
  source: string;
  note?: string;
}

const dir = join(ROOT, 'test-vectors');
const files = readdirSync(dir).filter((f) => f.endsWith('.json')).sort();
const vectors = files.map((f) => {
  const doc = JSON.parse(readFileSync(join(dir, f), 'utf8')) as { expect?: Expectation[]; analyses?: { steady?: unknown; compare?: unknown; efficiency?: unknown } };
  // the analysis a vector asks for picks the command
  const a = doc.analyses;
  const command = a?.compare !== undefined ? 'compare' : a?.efficiency !== undefined ? 'efficiency' : a?.steady !== undefined ? 'steady' : 'run';
  return { file: f, command, expect: doc.expect ?? [] };
});

const results = new Map<string, CliResult>();

beforeAll(async () => {
  const out = await inBatches(vectors, 4, (v) => cli([v.command, join('test-vectors', v.file), '--summary', '-', '--quiet']));
  vectors.forEach((v, i) => results.set(v.file, out[i]!));
}, 300_000);

describe('test vectors through the CLI', () => {
  it('has at least 25 vectors, each with expected values and sources, and covers every analysis command', () => {
    expect(vectors.length).toBeGreaterThanOrEqual(25);
    for (const c of ['run', 'steady', 'compare', 'efficiency']) expect(vectors.some((v) => v.command === c), c).toBe(true);
    for (const v of vectors) {
      expect(v.expect.length, v.file).toBeGreaterThan(0);
      for (const e of v.expect) expect(e.source.length, `${v.file} ${e.path}`).toBeGreaterThan(10);
    }
  });
  for (const v of vectors) {
    it(`${v.file} (${v.command})`, () => {
      const r = results.get(v.file)!;
      expect(r.stderr, v.file).toBe('');
      expect(r.code, v.file).toBe(0);
      const summary = JSON.parse(r.stdout) as unknown;
      for (const e of v.expect) {
        const got = lookupDotted(summary, e.path);
        const what = `${v.file}: ${e.path} (source: ${e.source})`;
        if (typeof e.value === 'number') {
          expect(typeof got, what).toBe('number');
          const tol = (e.atol ?? 0) + (e.rtol ?? 0) * Math.abs(e.value);
          expect(Math.abs((got as number) - e.value), `${what}: got ${String(got)}, expected ${e.value} +- ${tol}`).toBeLessThanOrEqual(tol);
        } else {
          expect(got, what).toBe(e.value);
        }
      }
    });
  }
});
