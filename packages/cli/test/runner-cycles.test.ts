import { readFileSync } from 'node:fs';
import { describe, expect, it } from 'vitest';
import { runPlan } from '../src/runner.ts';
import { buildPlan } from '../src/scenario/build.ts';
import { parseScenario } from '../src/scenario/load.ts';

// Per-cycle series of the run report: each cycle's mean lies between its min and max (a mean
// is a convex combination of the samples), and the per-cycle means average to the window mean
// (the cycles tile the window). Checked on the example scenario, whose uniform grid has points
// at every clock edge (the case where rounding once reopened a finished cycle).
describe('per-cycle series of a run', () => {
  it('cycles tile the window and their means lie between their extremes', () => {
    const text = readFileSync(new URL('../../../examples/pol-buck.json', import.meta.url), 'utf8');
    const parsed = parseScenario(JSON.parse(text) as unknown);
    if (!parsed.ok) throw new Error(parsed.problems.join('\n'));
    const plan = buildPlan(parsed.scenario, 'test');
    const out = runPlan(plan, { keepWaveforms: true });
    const c = out.cycles!;
    const T = plan.periodS!;
    expect(c.startS.length).toBe(Math.round((plan.stopS - plan.fromS) / T));
    const k = plan.record.indexOf('out');
    let weighted = 0;
    c.startS.forEach((s, i) => {
      expect(Math.abs(s - (plan.fromS + i * T))).toBeLessThan(1e-9 * T);
      expect(Math.abs(c.spanS[i]! - T)).toBeLessThan(1e-9 * T);
      const m = c.mean[i]![k]!;
      expect(m).toBeGreaterThanOrEqual(c.min[i]![k]! - 1e-12);
      expect(m).toBeLessThanOrEqual(c.max[i]![k]! + 1e-12);
      weighted += m * c.spanS[i]!;
    });
    // grid trapezoid per cycle against the exact window mean: the grid (40 points per cycle)
    // resolves the ripple's curvature to well under 1e-4 of the output
    expect(Math.abs(weighted / (plan.stopS - plan.fromS) - out.summary.signals.out!.mean)).toBeLessThan(1e-4);
  });
});
