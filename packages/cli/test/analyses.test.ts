/**
 * The compare, efficiency and sweep-report pieces in-process (the binary runs them in the test
 * vectors): reference values of the averaged model and of the switching circuit, report
 * structure (log-frequency Bode charts, curves), and input errors with JSON paths.
 */
import { readFileSync } from 'node:fs';
import { describe, expect, it } from 'vitest';
import { compareAveragedModel, logFrequencies } from '../src/analyses/compare.ts';
import { compareSections } from '../src/analyses/compare-report.ts';
import { efficiencyCurve } from '../src/analyses/efficiency.ts';
import { efficiencySections } from '../src/commands/efficiency.ts';
import { InputError } from '../src/errors.ts';
import { buildPlan, type Plan } from '../src/scenario/build.ts';
import { parseScenario } from '../src/scenario/load.ts';
import { renderSweepReport } from '../src/sweep/report.ts';

function plan(doc: unknown): Plan {
  const r = parseScenario(doc);
  if (!r.ok) throw new Error(r.problems.join('\n'));
  return buildPlan(r.scenario, 'test');
}

// Invented ideal buck: 10 V, 30 uH, 50 uF, 2 Ohm, 200 kHz, D = 0.5 (f0 = 4.11 kHz, Q = 2.58).
const vin = 10, L = 30e-6, C = 50e-6, R = 2, D = 0.5;
const buck = {
  name: 'buck',
  plant: {
    kind: 'stage', converter: 'buck', switchingHz: '200 kHz', input: { volts: vin },
    inductor: { henries: L }, outputCapacitor: { farads: C }, load: { kind: 'resistor', ohms: R },
    control: { kind: 'open-loop', duty: D },
  },
  run: { cycles: 5 },
};

/** |D / (1 + s L/R + s^2 L C)| in dB (Erickson and Maksimovic 2nd ed., ch. 8, table 8.2: buck line-to-output). */
function lineDb(f: number): number {
  const w = 2 * Math.PI * f;
  return 20 * Math.log10(D / Math.hypot(1 - w * w * L * C, (w * L) / R));
}

describe('compare', () => {
  it('line-to-output of the buck: averaged and switching match D / (1 + sL/R + s^2 LC) (Erickson and Maksimovic ch. 8)', () => {
    const r = compareAveragedModel(plan({ ...buck, analyses: { compare: { input: 'line', frequencies: [100, 4109, 20e3], loadStep: { amps: 1, cycles: 100 } } } }), 'test');
    for (const p of r.points) {
      // the averaged model is exact for this LTI network (analytic); the switching circuit's
      // line path is the switch itself, exact to rounding in CCM (0.001 dB: a wide margin)
      expect(p.averaged.magnitudeDb).toBeCloseTo(lineDb(p.frequencyHz), 9);
      expect(Math.abs(p.switching.magnitudeDb - lineDb(p.frequencyHz))).toBeLessThan(1e-3);
    }
    // DC point D Vin (ch. 2 volt-second balance, exact for the ideal buck's period average)
    expect(r.dc.out!.switching).toBeCloseTo(D * vin, 9);
    // load step of 1 A: the final output drops by nothing for an ideal buck (zero output
    // resistance at DC, ch. 8: Zout(0) = 0); averaged and switching cycle averages agree
    const ls = r.loadStep!;
    expect(Math.abs(ls.figures.switching.final - D * vin)).toBeLessThan(0.02);
    expect(ls.maxDeviation).toBeLessThan(1e-3);
    expect(ls.figures.averaged.undershoot).toBeGreaterThan(0.05);
  });

  it('draws Bode plots on a log frequency axis with the error, and the load step', () => {
    const r = compareAveragedModel(plan({ ...buck, analyses: { compare: { points: 5, loadStep: { amps: 0.5, cycles: 20 } } } }), 'test');
    // default range fs/1000 to fs/5
    expect(r.points.map((p) => p.frequencyHz)).toEqual(logFrequencies(200, 40e3, 5));
    const s = compareSections(r);
    const bode = s.find((x) => x.heading.startsWith('Frequency response'))!;
    expect(bode.charts!.map((c) => c.title)).toEqual(['Magnitude', 'Phase', 'Averaged model minus switching circuit']);
    expect(bode.charts!.every((c) => c.xLog === true && c.xUnit === 'Hz')).toBe(true);
    expect(s.some((x) => x.heading.startsWith('Load step'))).toBe(true);
  });

  it('names the JSON path of unsuitable scenarios', () => {
    const closed = { ...buck, plant: { ...buck.plant, control: { kind: 'voltage-mode', referenceVolts: 1, compensator: { kind: 'poles-zeros', integratorRadPerS: 1000, zerosHz: [], polesHz: [] } } } };
    expect(() => compareAveragedModel(plan(closed), 'f.json')).toThrow(/plant\.control\.kind: compare needs an open-loop or peak-current stage/);
    expect(() => compareAveragedModel(plan({ ...buck, analyses: { compare: { frequencies: [1e3, 150e3] } } }), 'f.json')).toThrow(/analyses\.compare\.frequencies\[1\]: must be below half the switching frequency/);
    expect(() => compareAveragedModel(plan({ ...buck, analyses: { compare: { output: 'nope' } } }), 'f.json')).toThrow(InputError);
  });
});

describe('efficiency curve', () => {
  it('matches eta = 1/(1 + R_L/(D\'^2 R)) of the boost with a winding resistance (Erickson and Maksimovic ch. 3)', () => {
    const p = plan({
      name: 'boost',
      plant: {
        kind: 'stage', converter: 'boost', switchingHz: '250 kHz', input: { volts: 6 },
        inductor: { henries: '150 uH', seriesOhms: 0.1 }, outputCapacitor: { farads: '100 uF' },
        load: { kind: 'resistor', ohms: 20 }, control: { kind: 'open-loop', duty: 0.4 },
      },
      run: { cycles: 5 },
      analyses: { efficiency: { loads: [15, 30] } },
    });
    const curve = efficiencyCurve(p, 'test');
    for (const pt of curve.points) {
      const eta = 1 / (1 + 0.1 / (0.36 * pt.load));
      // ripple (0.064 A on >= 0.9 A) raises the winding loss by < 0.05 %: 1e-4 on eta is ample
      expect(Math.abs(pt.efficiency! - eta)).toBeLessThan(1e-4);
      expect(Math.abs(pt.balanceError!)).toBeLessThan(1e-9);
    }
    const sec = efficiencySections(curve)[0]!;
    expect(sec.charts!.map((c) => c.title)).toEqual(['Efficiency', 'Losses']);
    expect(sec.charts![0]!.series[0]!.y).toHaveLength(2);
  });
});

describe('sweep report', () => {
  it('charts an output against a grid axis with Monte Carlo mean, min and max', () => {
    const raw = JSON.parse(readFileSync(new URL('../../../examples/pol-sweep.json', import.meta.url), 'utf8')) as { sweep: unknown };
    const r = parseScenario(raw);
    if (!r.ok) throw new Error(r.problems.join('\n'));
    const sweep = r.scenario.sweep!;
    const header = ['point', '/plant/drive/duty', '/plant/elements/RL/ohms', '/plant/elements/L1/henries', ...sweep.outputs, 'status', 'message'];
    const row = (i: number, d: number, ohms: number, y: number): string[] => [String(i), String(d), String(ohms), '1e-6', String(y), '', '', '', 'ok', ''];
    const html = renderSweepReport('s', sweep, header, [row(0, 0.2, 1.1, 1), row(1, 0.2, 1.1, 3), row(2, 0.4, 1.1, 5)], { x: undefined, columns: ['signals.out.mean'] });
    expect(html).toContain('Outputs against /plant/drive/duty');
    expect(html).toContain('(mean)');
    expect(() => renderSweepReport('s', sweep, header, [], { x: '/nope', columns: undefined })).toThrow(/--x: "\/nope" is not a grid axis/);
  });
});
