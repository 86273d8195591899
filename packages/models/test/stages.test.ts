import { CircuitModel, SampleKind } from '@edgewise/engine';
import { describe, expect, it } from 'vitest';
import { buildStage, openLoopPwm, ParameterError, type StageKind, type StageParams } from '../src/index.ts';
import { extremes, periodicState, runStage } from './support/run.ts';

const FS = 100e3;
const T = 1 / FS;
const VG = 12;

/** Relative closeness: |a - b| <= rtol |b| + atol. */
function near(a: number, b: number, rtol: number, atol = 0): void {
  expect(Math.abs(a - b), `${a} vs ${b}`).toBeLessThanOrEqual(rtol * Math.abs(b) + atol);
}

/** Ideal CCM conversion ratio M(D) (Erickson & Maksimovic, 2nd ed., ch. 2). */
function idealRatio(kind: StageKind, d: number): number {
  return kind === 'buck' ? d : kind === 'boost' ? 1 / (1 - d) : -d / (1 - d);
}

/** Average inductor current in CCM for a resistive load R (charge balance on the output capacitor). */
function inductorAverage(kind: StageKind, d: number, v: number, r: number): number {
  return kind === 'buck' ? v / r : Math.abs(v) / (r * (1 - d));
}

function stageParams(kind: StageKind, over: Partial<StageParams> = {}): StageParams {
  return {
    kind,
    switchingHz: FS,
    input: { volts: VG },
    inductor: { henries: 200e-6 },
    outputCapacitor: { farads: 470e-6 },
    load: { kind: 'resistor', ohms: 10 },
    ...over,
  };
}

/** Runs an open-loop stage from its periodic steady state and returns the run over the last cycle. */
function steady(p: StageParams, duty: number, record: string[] = [], gridS?: number) {
  const stage = buildStage(p);
  const law = openLoopPwm(stage, { duty });
  const m = idealRatio(p.kind, duty);
  const r = p.load.kind === 'resistor' ? p.load.ohms : 1;
  const x0 = periodicState(stage, law, { L1: inductorAverage(p.kind, duty, m * VG, r), C1: m * VG });
  const cycles = 3;
  const run = runStage(stage, law, {
    cycles,
    averageCycles: 1,
    average: [stage.signals.outputVoltage, stage.signals.inductorCurrent],
    record,
    recordFromS: (cycles - 1) * T,
    ...(gridS !== undefined ? { gridS } : {}),
    initialState: x0,
  });
  expect(run.result.status).toBe('finished');
  return { stage, run, x0 };
}

describe('ideal CCM conversion ratios (Erickson & Maksimovic, ch. 2)', () => {
  // Tolerances: for the buck, inductor volt-second balance gives <v> = D Vg exactly at periodic
  // steady state (ideal switches, no DCR), so the check is tight. For the boost and the
  // buck-boost the balance involves the output voltage averaged over the off-interval only,
  // which differs from the cycle average by a fraction of the output ripple; the relative
  // ripple here is D Ts / (R C) = 1.3e-3 at D = 0.6, so 1.3e-3 bounds the deviation.
  for (const kind of ['buck', 'boost', 'buck-boost'] as const) {
    for (const rectification of ['diode', 'synchronous'] as const) {
      for (const duty of [0.3, 0.6]) {
        it(`${kind}, ${rectification}, D = ${duty}: <v>/Vg = ${idealRatio(kind, duty).toFixed(4)}`, () => {
          const { run, stage } = steady(stageParams(kind, { rectification, load: { kind: 'resistor', ohms: kind === 'buck' ? 2 : 10 } }), duty);
          const m = run.avg[stage.signals.outputVoltage]! / VG;
          const tol = kind === 'buck' ? 1e-9 : (duty * T) / (10 * 470e-6);
          near(m, idealRatio(kind, duty), tol);
        });
      }
    }
  }
});

describe('ratios with conduction losses (Erickson & Maksimovic, ch. 3, averaged dc equivalent circuits)', () => {
  it('synchronous buck with inductor DCR and switch on-resistance: V/Vg = D / (1 + (RL + Ron)/R), exact (Ron always in series with L)', () => {
    const d = 0.45, rl = 0.05, ron = 0.03, r = 2;
    const { run, stage } = steady(stageParams('buck', {
      rectification: 'synchronous', inductor: { henries: 200e-6, seriesOhms: rl },
      mainSwitch: { onOhms: ron }, syncSwitch: { onOhms: ron }, load: { kind: 'resistor', ohms: r },
    }), d);
    // exact: inductor volt-second balance D Vg - (RL + Ron) <iL> = <v> and <iL> = <v>/R
    near(run.avg[stage.signals.outputVoltage]! / VG, d / (1 + (rl + ron) / r), 1e-9);
  });

  it('boost with inductor DCR: V/Vg = 1/(1-D) * 1/(1 + RL/((1-D)^2 R))', () => {
    const d = 0.6, rl = 0.2, r = 10;
    const { run, stage } = steady(stageParams('boost', { inductor: { henries: 200e-6, seriesOhms: rl } }), d);
    // small-ripple averaging: relative output ripple D Ts/(R C) = 1.3e-3 bounds the error
    near(run.avg[stage.signals.outputVoltage]! / VG, (1 / (1 - d)) / (1 + rl / ((1 - d) ** 2 * r)), 1.3e-3);
  });

  it('boost with DCR, switch Ron, diode VD and RD: V/Vg = (1/D\')(1 - D\' VD/Vg) / (1 + (RL + D Ron + D\' RD)/(D\'^2 R))', () => {
    const d = 0.5, rl = 0.1, ron = 0.05, vd = 0.6, rd = 0.04, r = 10, dp = 1 - d;
    const { run, stage } = steady(stageParams('boost', {
      inductor: { henries: 200e-6, seriesOhms: rl }, mainSwitch: { onOhms: ron },
      diode: { forwardVolts: vd, onOhms: rd },
    }), d);
    const expected = ((1 / dp) * (1 - (dp * vd) / VG)) / (1 + (rl + d * ron + dp * rd) / (dp * dp * r));
    near(run.avg[stage.signals.outputVoltage]! / VG, expected, 1.3e-3);
  });

  it('inverting buck-boost with inductor DCR: V/Vg = -D/(1-D) * 1/(1 + RL/((1-D)^2 R))', () => {
    const d = 0.4, rl = 0.15, r = 10;
    const { run, stage } = steady(stageParams('buck-boost', { inductor: { henries: 200e-6, seriesOhms: rl } }), d);
    near(run.avg[stage.signals.outputVoltage]! / VG, (-d / (1 - d)) / (1 + rl / ((1 - d) ** 2 * r)), 1.3e-3);
  });
});

describe('ripple (Erickson & Maksimovic, ch. 2, small-ripple approximation)', () => {
  it('buck: inductor half-ripple (Vg - V) D Ts / (2L) and output ripple Δi Ts / (8C) without ESR', () => {
    const d = 0.4, l = 200e-6, c = 47e-6;
    const { run, stage } = steady(stageParams('buck', { inductor: { henries: l }, outputCapacitor: { farads: c }, load: { kind: 'resistor', ohms: 2 } }), d,
      ['L1.current', 'out'], T / 4000);
    const v = run.avg[stage.signals.outputVoltage]!;
    const iL = extremes(run, 'L1.current', 2 * T, 3 * T);
    const vo = extremes(run, 'out', 2 * T, 3 * T);
    const di = (VG - v) * d * T / (2 * l);
    // the slope uses the mean output voltage over the on-interval, which differs from V by less
    // than half the output ripple: relative error < dv / (Vg - V) ~ 2e-4; 1e-3 allowed
    near((iL.max - iL.min) / 2, di, 1e-3);
    // the charge formula assumes a triangular capacitor current (exact here up to the ripple
    // influence on the slopes, < 1e-3) and the grid of Ts/4000 resolves the extremum (error
    // ~ (Ts/8000)^2 curvature, negligible); 1 % allowed
    near((vo.max - vo.min) / 2, di * T / (8 * c), 1e-2);
  });

  it('buck with ESR: peak-to-peak output ripple equals the analytic ripple of vC + Resr iC for the triangular current', () => {
    const d = 0.4, l = 200e-6, c = 47e-6, esr = 0.05;
    // a light load (20 ohm) so that the load's share of the ripple current, ESR/(R + ESR) = 0.25 %,
    // stays inside the tolerance: the small-ripple analysis puts all ripple current in the capacitor
    const { run, stage } = steady(stageParams('buck', { inductor: { henries: l }, outputCapacitor: { farads: c, esrOhms: esr }, load: { kind: 'resistor', ohms: 20 } }), d,
      ['out'], T / 4000);
    const v = run.avg[stage.signals.outputVoltage]!;
    const di = (VG - v) * d * T / (2 * l);
    // analytic: iC(t) rises linearly from -di to +di over D Ts and falls back over (1-D) Ts;
    // vC is its integral / C; the output is vC + ESR iC (circuit theory)
    const N = 20000;
    let q = 0, lo = Infinity, hi = -Infinity;
    for (let k = 0; k <= N; k++) {
      const t = (k / N) * T;
      const ic = t < d * T ? -di + (2 * di * t) / (d * T) : di - (2 * di * (t - d * T)) / ((1 - d) * T);
      if (k > 0) {
        const tp = ((k - 1) / N) * T;
        const icp = tp < d * T ? -di + (2 * di * tp) / (d * T) : di - (2 * di * (tp - d * T)) / ((1 - d) * T);
        q += 0.5 * (ic + icp) * (T / N);
      }
      const vo = q / c + esr * ic;
      lo = Math.min(lo, vo);
      hi = Math.max(hi, vo);
    }
    const vo = extremes(run, 'out', 2 * T, 3 * T);
    // small-ripple error budget as without ESR plus the 0.25 % load share; 1 % allowed
    near(vo.max - vo.min, hi - lo, 1e-2);
    // and ESR dominates here: the ripple exceeds the ESR-free value Δi Ts / (4C) (p-p)
    expect(vo.max - vo.min).toBeGreaterThan(di * T / (4 * c));
  });

  it('boost: inductor half-ripple Vg D Ts / (2L) (exact: the inductor sees Vg during the on-time) and output ripple V D Ts / (2 R C)', () => {
    const d = 0.5, l = 100e-6, c = 47e-6, r = 20;
    const { run, stage } = steady(stageParams('boost', { inductor: { henries: l }, outputCapacitor: { farads: c }, load: { kind: 'resistor', ohms: r } }), d,
      ['L1.current', 'out'], T / 4000);
    const v = run.avg[stage.signals.outputVoltage]!;
    const iL = extremes(run, 'L1.current', 2 * T, 3 * T);
    const vo = extremes(run, 'out', 2 * T, 3 * T);
    near((iL.max - iL.min) / 2, VG * d * T / (2 * l), 1e-9);
    // the capacitor discharges through R exponentially rather than at constant V/R: relative
    // error ~ D Ts / (2 R C) = 2.7e-3; 1 % allowed
    near((vo.max - vo.min) / 2, v * d * T / (2 * r * c), 1e-2);
  });

  it('inverting buck-boost: inductor half-ripple Vg D Ts / (2L), exact', () => {
    const d = 0.35, l = 150e-6;
    const { run } = steady(stageParams('buck-boost', { inductor: { henries: l } }), d, ['L1.current']);
    const iL = extremes(run, 'L1.current', 2 * T, 3 * T);
    near((iL.max - iL.min) / 2, VG * d * T / (2 * l), 1e-9);
  });
});

describe('DCM with diode rectification (Erickson & Maksimovic, ch. 5)', () => {
  // K = 2L / (R Ts). Buck: M = 2 / (1 + sqrt(1 + 4K/D^2)), Kcrit = 1 - D.
  // Boost: M = (1 + sqrt(1 + 4 D^2 / K)) / 2, Kcrit = D (1 - D)^2.
  // Buck-boost: M = -D / sqrt(K), Kcrit = (1 - D)^2.
  // D2 (diode conduction interval) from inductor volt-second balance: buck D (1-M)/M, boost
  // D/(M-1), buck-boost D/|M|.
  const cases = [
    { kind: 'buck' as const, d: 0.4, k: 0.2, m: (d: number, k: number) => 2 / (1 + Math.sqrt(1 + (4 * k) / (d * d))), kcrit: (d: number) => 1 - d, d2: (d: number, m: number) => (d * (1 - m)) / m },
    { kind: 'boost' as const, d: 0.3, k: 0.05, m: (d: number, k: number) => (1 + Math.sqrt(1 + (4 * d * d) / k)) / 2, kcrit: (d: number) => d * (1 - d) ** 2, d2: (d: number, m: number) => d / (m - 1) },
    { kind: 'buck-boost' as const, d: 0.3, k: 0.2, m: (d: number, k: number) => -d / Math.sqrt(k), kcrit: (d: number) => (1 - d) ** 2, d2: (d: number, m: number) => d / Math.abs(m) },
  ];
  for (const c of cases) {
    it(`${c.kind}: M(D, K), D2 and the CCM/DCM boundary K_crit(D)`, () => {
      const l = 50e-6;
      const r = (2 * l) / (c.k * T);
      const cap = 2e-3; // large: the DCM formulas assume a small output ripple
      const p = stageParams(c.kind, { inductor: { henries: l }, outputCapacitor: { farads: cap }, load: { kind: 'resistor', ohms: r } });
      const m = c.m(c.d, c.k);
      const stage = buildStage(p);
      const law = openLoopPwm(stage, { duty: c.d });
      const x0 = periodicState(stage, law, { L1: 0, C1: m * VG });
      const run = runStage(stage, law, {
        cycles: 2, average: ['out'], record: ['L1.current'], recordFromS: T, initialState: x0,
      });
      // relative output ripple ~ (M/(R C)) Ts: ~2e-4 here; the formulas hold to that order: 1e-3 allowed
      near(run.avg.out! / VG, m, 1e-3);
      // the cycle ends in DCM: inductor current zero at the clock edge
      expect(Math.abs(x0['L1.current']!)).toBeLessThan(1e-9);
      // D2: from the main switch's turn-off (D Ts) to the diode's turn-off event
      const model = new CircuitModel(buildStage(p).circuit);
      const dBit = model.circuit.devices.findIndex((dv) => dv.id === 'D1');
      const after = run.samples.filter((s) => s.kind === SampleKind.After && s.t > T && s.t < 2 * T);
      const dOff = after.find((s) => s.t > T + c.d * T + 1e-12 && ((s.key >>> dBit) & 1) === 0);
      expect(dOff).toBeDefined();
      near((dOff!.t - T - c.d * T) / T, c.d2(c.d, m), 2e-3);
      // boundary: K 10 % above K_crit stays in CCM (positive valley), 10 % below enters DCM
      for (const [f, ccm] of [[1.1, true], [0.9, false]] as const) {
        const kb = c.kcrit(c.d) * f;
        const pb = { ...p, load: { kind: 'resistor' as const, ohms: (2 * l) / (kb * T) } };
        const sb = buildStage(pb);
        const lb = openLoopPwm(sb, { duty: c.d });
        const guessM = ccm ? idealRatio(c.kind, c.d) : c.m(c.d, kb);
        const xb = periodicState(sb, lb, { L1: 0, C1: guessM * VG });
        if (ccm) expect(xb['L1.current']!).toBeGreaterThan(1e-3);
        else expect(Math.abs(xb['L1.current']!)).toBeLessThan(1e-9);
      }
    });
  }
});

describe('stage assembly', () => {
  it('exposes the StageSignals names, readable element ids and the designed period', () => {
    for (const kind of ['buck', 'boost', 'buck-boost'] as const) {
      for (const rectification of ['diode', 'synchronous'] as const) {
        const s = buildStage(stageParams(kind, { rectification, input: { volts: VG, sourceOhms: 0.01, filter: { henries: 1e-6, farads: 10e-6, esrOhms: 0.02 } } }));
        const model = new CircuitModel(s.circuit);
        for (const name of Object.values(s.signals)) expect(() => model.resolve(name)).not.toThrow();
        const ids = s.circuit.elements.map((e) => e.id);
        expect(ids).toEqual(expect.arrayContaining(['VIN', 'LF1', 'CF1', 'Q1', rectification === 'diode' ? 'D1' : 'Q2', 'L1', 'C1', 'RLOAD']));
        expect(s.periodS).toBe(T);
        expect(s.gates.sync !== undefined).toBe(rectification === 'synchronous');
      }
    }
  });

  it('energy balance with an input filter: source power = load power + ESR and DCR losses (exact at periodic steady state, circuit theory)', () => {
    const p = stageParams('boost', {
      input: { volts: VG, filter: { henries: 2e-6, seriesOhms: 0.01, farads: 20e-6, esrOhms: 0.05 } },
      outputCapacitor: { farads: 470e-6, esrOhms: 0.02 },
    });
    const stage = buildStage(p);
    const law = openLoopPwm(stage, { duty: 0.5 });
    const x0 = periodicState(stage, law, { L1: 4.8, C1: 24, CF1: VG });
    const sg = stage.signals;
    const run = runStage(stage, law, {
      cycles: 1, initialState: x0,
      averageProducts: [[sg.inputVoltage, sg.inputCurrent], [sg.outputVoltage, sg.loadCurrent], ['CF1.current', 'CF1.current'], ['C1.current', 'C1.current'], ['LF1.current', 'LF1.current']],
    });
    const a = run.avg;
    const losses = 0.05 * a['CF1.current*CF1.current']! + 0.02 * a['C1.current*C1.current']! + 0.01 * a['LF1.current*LF1.current']!;
    expect(a[`${sg.outputVoltage}*${sg.loadCurrent}`]!).toBeGreaterThan(20);
    near(a[`${sg.inputVoltage}*${sg.inputCurrent}`]!, a[`${sg.outputVoltage}*${sg.loadCurrent}`]! + losses, 1e-9);
  });

  it('load steps: a resistance step switches load resistors at the given time, a current step steps the source', () => {
    const stage = buildStage(stageParams('buck', { load: { kind: 'resistor', ohms: 4, steps: [{ atS: 20 * T, ohms: 2 }, { atS: 40 * T, ohms: 4 }] } }));
    expect(stage.gateSchedule).toHaveLength(4);
    const law = openLoopPwm(stage, { duty: 0.5 });
    const run = runStage(stage, law, { cycles: 60, record: ['out', 'iload'], initialState: { C1: 6, L1: 1.5 } });
    const byT = (t: number) => run.samples.filter((s) => s.kind === SampleKind.After && Math.abs(s.t - t) < 1e-12).at(-1)!;
    for (const [t, r] of [[10 * T, 4], [30 * T, 2], [50 * T, 4]] as const) {
      const s = byT(t);
      near(s.v[1]!, s.v[0]! / r, 1e-12);
    }
    const cs = buildStage(stageParams('buck-boost', { load: { kind: 'current', amps: 1, steps: [{ atS: 5 * T, amps: -0.5 }] } }));
    const r2 = runStage(cs, openLoopPwm(cs, { duty: 0.4 }), { cycles: 10, record: ['iload'], initialState: { C1: -8 } });
    const s1 = r2.samples.find((s) => s.t > 2 * T)!;
    const s2 = r2.samples.find((s) => s.t > 6 * T)!;
    // inverting stage: a consuming load draws current from ground into the negative output
    expect(s1.v[0]).toBeCloseTo(-1, 12);
    expect(s2.v[0]).toBeCloseTo(0.5, 12);
  });
});

describe('parameter validation', () => {
  it('names every invalid parameter with its reason, all at once', () => {
    let err: unknown;
    try {
      buildStage({
        kind: 'boost', switchingHz: 0, input: { volts: 12 }, inductor: { henries: -1e-6 },
        outputCapacitor: { farads: 0 }, load: { kind: 'resistor', ohms: 10 },
      });
    } catch (e) {
      err = e;
    }
    expect(err).toBeInstanceOf(ParameterError);
    const issues = (err as ParameterError).issues.map((i) => i.path);
    expect(issues).toEqual(['switchingHz', 'inductor.henries', 'outputCapacitor.farads']);
    expect((err as Error).message).toContain('inductor.henries: must be a finite number > 0 (got -0.000001)');
  });

  it('rejects an unknown kind, bad load steps, a sync switch on a diode stage', () => {
    expect(() => buildStage({ ...stageParams('buck'), kind: 'flyback' as unknown as StageKind })).toThrow(/kind: must be 'buck', 'boost' or 'buck-boost'/);
    expect(() => buildStage(stageParams('buck', { load: { kind: 'resistor', ohms: 5, steps: [{ atS: 1e-3, ohms: 2 }, { atS: 5e-4, ohms: 3 }] } })))
      .toThrow(/load\.steps\[1\]\.atS: must be later than the step before it/);
    expect(() => buildStage(stageParams('buck', { syncSwitch: { onOhms: 0.01 } }))).toThrow(/syncSwitch: applies to rectification 'synchronous' only/);
    expect(() => buildStage(stageParams('buck', { load: { kind: 'resistor', ohms: Number.NaN } }))).toThrow(/load\.ohms: must be a finite number > 0 \(got NaN\)/);
  });
});
