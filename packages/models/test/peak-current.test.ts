import { describe, expect, it } from 'vitest';
import { buildStage, peakCurrentMode, ParameterError, type PwmController, type StageParams } from '../src/index.ts';
import { atClockEdges, runStage } from './support/run.ts';

const FS = 100e3;
const T = 1 / FS;
const VG = 12;
const L = 20e-6;
const RI = 0.1;

function near(a: number, b: number, rtol: number, atol = 0): void {
  expect(Math.abs(a - b), `${a} vs ${b}`).toBeLessThanOrEqual(rtol * Math.abs(b) + atol);
}

/**
 * A buck with a 1 F output capacitor and a constant-current load equal to the steady-state
 * average inductor current: the output stays constant to ~1e-9 V per cycle, the setting of the
 * cycle-to-cycle current-loop analysis (Ridley 1991).
 */
function stiffBuck(d: number, loadAmps: number, rectification: 'diode' | 'synchronous' = 'synchronous') {
  const p: StageParams = {
    kind: 'buck', rectification, switchingHz: FS, input: { volts: VG }, inductor: { henries: L },
    outputCapacitor: { farads: 1 }, load: { kind: 'current', amps: loadAmps },
  };
  return buildStage(p);
}

describe('peak current mode: cycle-to-cycle stability (Ridley 1991; Erickson & Maksimovic, ch. 12)', () => {
  // Slopes: m1 = (Vg - V)/L (on), m2 = V/L (off), ma = Se/Ri (slope compensation in A/s).
  // A valley perturbation propagates as dI(n+1) = -(m2 - ma)/(m1 + ma) dI(n), exact for a
  // piecewise-linear inductor current with constant output voltage.
  const cases = [
    { d: 0.3, maFrac: 0 },
    { d: 0.7, maFrac: 0 },
    { d: 0.7, maFrac: 0.25 },
    { d: 0.7, maFrac: 0.5 },
  ];
  for (const c of cases) {
    const v = c.d * VG;
    const m1 = (VG - v) / L, m2 = v / L, ma = c.maFrac * m2;
    const alpha = -(m2 - ma) / (m1 + ma);
    it(`D = ${c.d}, ma = ${c.maFrac} m2: measured perturbation ratio equals ${alpha.toFixed(4)}`, () => {
      const ipk = 3;
      const peak = ipk - ma * c.d * T; // where Ri iL + Se t meets Ri ipk
      const valley = peak - m2 * (1 - c.d) * T;
      const stage = stiffBuck(c.d, peak - (m2 * (1 - c.d) * T) / 2);
      const law = peakCurrentMode(stage, { senseOhms: RI, slopeCompensationVPerS: ma * RI, command: { kind: 'fixed', peakAmps: ipk } });
      const run = runStage(stage, law, { cycles: 8, record: ['L1.current'], initialState: { C1: v, L1: valley + 1e-3 } });
      const iv = atClockEdges(run, 'L1.current', T).map((x) => x.value);
      expect(iv.length).toBeGreaterThanOrEqual(6);
      for (let n = 0; n < 4; n++) {
        const ratio = (iv[n + 2]! - iv[n + 1]!) / (iv[n + 1]! - iv[n]!);
        // the output ripple dI Ts/(8C) ~ 2e-6 V bends the slopes by ~ 5e-7 relative, sampled at
        // perturbation-dependent phases; 1e-5 relative allowed
        near(ratio, alpha, 1e-5);
      }
    });
  }

  it('below D = 0.5 without slope compensation a perturbation dies out; ma = m2/2 restores stability at D = 0.7', () => {
    for (const [d, maFrac] of [[0.3, 0], [0.7, 0.5]] as const) {
      const v = d * VG, m2 = v / L, ma = maFrac * m2;
      const ipk = 3;
      const peak = ipk - ma * d * T;
      const valley = peak - m2 * (1 - d) * T;
      const stage = stiffBuck(d, peak - (m2 * (1 - d) * T) / 2);
      const law = peakCurrentMode(stage, { senseOhms: RI, slopeCompensationVPerS: ma * RI, command: { kind: 'fixed', peakAmps: ipk } });
      const run = runStage(stage, law, { cycles: 60, record: ['L1.current'], initialState: { C1: v, L1: valley + 0.2 } });
      const iv = atClockEdges(run, 'L1.current', T).map((x) => x.value);
      // |alpha| <= 0.54: 0.2 A shrinks below 1e-12 A within 50 cycles: a fixed point
      near(iv.at(-1)!, iv.at(-2)!, 0, 1e-11);
      // the transient moved the stiff output by ~2e-6 V, shifting the valley by (1-D) Ts/L per volt
      near(iv.at(-1)!, valley, 0, 1e-6);
    }
  });

  it('above D = 0.5 without slope compensation the valleys settle into a period-2 pattern', () => {
    // Diode buck at D = 0.6 (V = 7.2 V held by the stiff output), peak 2 A: the unstable
    // current loop (alpha = -1.5) grows until the valley reaches zero (DCM); the orbit is then
    // valley 0 -> valley Ipk - m2 (Ipk/m1 ... ) alternating (derived from the slopes below).
    const d = 0.6, v = d * VG, m1 = (VG - v) / L, m2 = v / L, ipk = 2;
    // from a zero valley the current reaches ipk after ipk/m1 and falls for the rest of the
    // cycle: the next valley is ipk - m2 (T - ipk/m1); from there it falls to zero (circuit theory)
    const high = ipk - m2 * (T - ipk / m1);
    // load = the orbit's average current, so that the stiff output does not drift
    const t1 = ipk / m1, t2 = (ipk - high) / m1, t3 = ipk / m2;
    const avgA = (ipk * t1 / 2 + ((ipk + high) / 2) * (T - t1)) / T;
    const avgB = (((high + ipk) / 2) * t2 + (ipk / 2) * t3) / T;
    const stage = stiffBuck(d, (avgA + avgB) / 2, 'diode');
    const law = peakCurrentMode(stage, { senseOhms: RI, command: { kind: 'fixed', peakAmps: ipk } });
    const steadyValley = ipk - m2 * (1 - d) * T;
    const run = runStage(stage, law, { cycles: 80, record: ['L1.current', 'out'], initialState: { C1: v, L1: steadyValley + 1e-3 } });
    const iv = atClockEdges(run, 'L1.current', T).map((x) => x.value).slice(-20);
    for (let n = 0; n + 2 < iv.length; n++) {
      near(iv[n + 2]!, iv[n]!, 0, 1e-6);
      expect(Math.abs(iv[n + 1]! - iv[n]!)).toBeGreaterThan(1);
    }
    const sorted = [iv[0]!, iv[1]!].sort((a, b) => a - b);
    near(sorted[0]!, 0, 0, 1e-9);
    // the growing transient moved the stiff output by ~1e-5 V: evaluate the orbit at the output
    // voltage reached (its ripple on 1 F is ~1e-6 V: 1e-6 relative allowed)
    const vEnd = run.samples.at(-1)!.v[1]!;
    const highEnd = ipk - (vEnd / L) * (T - ipk / ((VG - vEnd) / L));
    near(sorted[1]!, highEnd, 1e-6);
    near(highEnd, high, 1e-4);
  });
});

describe('peak current mode on the other stages', () => {
  it('boost: the perturbation ratio -(m2 - ma)/(m1 + ma) with m1 = Vg/L, m2 = (V - Vg)/L (Ridley 1991)', () => {
    const d = 0.6, v = VG / (1 - d), m1 = VG / L, m2 = (v - VG) / L, ipk = 3;
    for (const maFrac of [0, 0.5]) {
      const ma = maFrac * m2;
      const peak = ipk - ma * d * T;
      const valley = peak - m2 * (1 - d) * T;
      const stage = buildStage({
        kind: 'boost', rectification: 'synchronous', switchingHz: FS, input: { volts: VG }, inductor: { henries: L },
        outputCapacitor: { farads: 1 }, load: { kind: 'current', amps: (peak - (m2 * (1 - d) * T) / 2) * (1 - d) },
      });
      const law = peakCurrentMode(stage, { senseOhms: RI, slopeCompensationVPerS: ma * RI, maxDuty: 0.95, command: { kind: 'fixed', peakAmps: ipk } });
      const run = runStage(stage, law, { cycles: 6, record: ['L1.current'], initialState: { C1: v, L1: valley + 1e-3 } });
      const iv = atClockEdges(run, 'L1.current', T).map((x) => x.value);
      const ratio = (iv[3]! - iv[2]!) / (iv[2]! - iv[1]!);
      // same error budget as for the buck (output ripple on 1 F): 1e-5 relative
      near(ratio, -(m2 - ma) / (m1 + ma), 1e-5);
    }
  });

  it('inverting buck-boost: the outer loop regulates the negative output (default feedback gain -1)', () => {
    const stage = buildStage({
      kind: 'buck-boost', switchingHz: FS, input: { volts: VG }, inductor: { henries: 22e-6, seriesOhms: 0.02 },
      outputCapacitor: { farads: 220e-6, esrOhms: 0.01 }, diode: { forwardVolts: 0.4 },
      load: { kind: 'resistor', ohms: 24, steps: [{ atS: 3e-3, ohms: 12 }] },
    });
    // current-mode plant with its right-half-plane zero near 40 kHz: a type II with the zero at
    // 300 Hz and a 20 kHz pole keeps the crossover low (our design)
    const law = peakCurrentMode(stage, {
      senseOhms: 0.05, slopeCompensationVPerS: 0.05 * 0.5 * (VG / 22e-6), maxDuty: 0.85,
      command: { kind: 'voltage-loop', referenceVolts: 12, softStartS: 1e-3, compensator: { kind: 'poles-zeros', midbandGain: 0.4, zerosHz: [300], polesHz: [20e3] } },
    });
    const run = runStage(stage, law, { cycles: 600, average: ['out'], averageCycles: 10, record: ['out'], recordFromS: 2e-3 });
    expect(run.result.status).toBe('finished');
    // integrator: the 10-cycle average sits at -12 V up to the slow settling of the 300 Hz zero (1e-3)
    near(run.avg.out!, -12, 1e-3);
    // after the 0.5 A -> 1 A step: within 5 % throughout (common practice)
    for (const s of run.samples) near(s.v[0]!, -12, 5e-2);
  });
});

describe('peak current mode: latch, blanking, maximum duty, current limit', () => {
  it('the main switch turns off where Ri iL + Se t reaches the command (exact at steady state)', () => {
    const d = 0.5, v = d * VG, m2 = v / L, se = 0.5 * m2 * RI, ipk = 3;
    const peak = ipk - (se / RI) * d * T;
    const stage = stiffBuck(d, peak - (m2 * (1 - d) * T) / 2);
    const law = peakCurrentMode(stage, { senseOhms: RI, slopeCompensationVPerS: se, command: { kind: 'fixed', volts: RI * ipk } });
    const run = runStage(stage, law, { cycles: 40, record: ['L1.current'], initialState: { C1: v, L1: peak - m2 * (1 - d) * T } });
    let max = -Infinity;
    for (const s of run.samples) if (s.t > 30 * T) max = Math.max(max, s.v[0]!);
    near(max, peak, 1e-9);
  });

  it('leading-edge blanking: a command below the valley still gives at least the blanking time of on-time', () => {
    const d = 0.5, v = d * VG, m1 = (VG - v) / L;
    const stage = stiffBuck(d, 0);
    const blank = 1e-6;
    const law = peakCurrentMode(stage, { senseOhms: RI, blankingS: blank, command: { kind: 'fixed', peakAmps: -10 } });
    const run = runStage(stage, law, { cycles: 2, record: ['L1.current'], initialState: { C1: v, L1: 1 } });
    const iv = run.samples.map((s) => s.v[0]!);
    // on for exactly the blanking time, then off: the peak of the first cycle is 1 + m1 * blank
    // (the 1 A charging the 1 F output changes m1 by 5e-8 relative over the interval)
    near(Math.max(...iv), 1 + m1 * blank, 1e-7);
  });

  it('maximum duty ends pulses that never reach the command; the current limit ends pulses at the limit', () => {
    const stage = stiffBuck(0.5, 0);
    const law = peakCurrentMode(stage, { senseOhms: RI, maxDuty: 0.3, command: { kind: 'fixed', peakAmps: 100 } });
    const run = runStage(stage, law, { cycles: 10, record: ['L1.current'], initialState: { C1: 6 } });
    const c = run.controller as PwmController;
    expect(c.stats.maxDutyPulses).toBe(10);
    const lim = peakCurrentMode(stage, { senseOhms: RI, command: { kind: 'fixed', peakAmps: 100 }, currentLimit: { amps: 2.5 } });
    const r2 = runStage(stage, lim, { cycles: 20, record: ['L1.current'], initialState: { C1: 6 } });
    expect((r2.controller as PwmController).stats.currentLimitedPulses).toBeGreaterThan(10);
    near(Math.max(...r2.samples.map((s) => s.v[0]!)), 2.5, 1e-9);
  });
});

describe('peak current mode with an outer voltage loop', () => {
  // Buck 12 V -> 5 V, L = 22 uH, C = 100 uF, fs = 100 kHz; divider 0.5, reference 2.5 V.
  // Current-mode plant ~ (R/Ri) / (1 + s R C) (Erickson & Maksimovic ch. 12, low-frequency
  // approximation); type II compensator: zero 1 kHz, pole 50 kHz, mid-band gain 1.25 for a
  // crossover near 10 kHz (our design).
  const p: StageParams = {
    kind: 'buck', rectification: 'synchronous', switchingHz: FS, input: { volts: VG },
    inductor: { henries: 22e-6, seriesOhms: 0.02 }, outputCapacitor: { farads: 100e-6, esrOhms: 0.01 },
    mainSwitch: { onOhms: 0.02 }, syncSwitch: { onOhms: 0.02 },
    load: { kind: 'resistor', ohms: 2.5, steps: [{ atS: 3e-3, ohms: 5 }, { atS: 4.5e-3, ohms: 2.5 }] },
  };
  const m2 = 5 / 22e-6;
  const stage = buildStage(p);
  const law = peakCurrentMode(stage, {
    senseOhms: RI, slopeCompensationVPerS: 0.5 * m2 * RI,
    deadTime: { mainOffToSyncOnS: 40e-9, syncOffToMainOnS: 40e-9 },
    command: {
      kind: 'voltage-loop', referenceVolts: 2.5, feedbackGain: 0.5, softStartS: 1e-3,
      compensator: { kind: 'poles-zeros', midbandGain: 1.25, zerosHz: [1e3], polesHz: [50e3] },
    },
  });

  it('soft-starts, regulates with no static error (integrator) and recovers from load steps', () => {
    const cycles = 600;
    const run = runStage(stage, law, { cycles, average: ['out'], averageCycles: 1, record: ['out'], recordFromS: 0 });
    expect(run.result.status).toBe('finished');
    // at steady state the integrator's input averages to zero: <0.5 v> = 2.5 V exactly up to the
    // residual transient (1.5 ms after the last step, ~15 crossover periods): 1e-4 relative
    near(run.avg.out!, 5, 1e-4);
    const out = (t0: number, t1: number) => run.samples.filter((s) => s.t >= t0 && s.t <= t1).map((s) => s.v[0]!);
    // soft start: no overshoot beyond 2 % (common practice for a ramped reference)
    expect(Math.max(...out(0, 2.9e-3))).toBeLessThan(5.1);
    // before the first step: regulated within 0.5 %
    for (const x of out(2.5e-3, 3e-3)) near(x, 5, 5e-3);
    // load step 2 A -> 1 A and back: deviation bounded by ~dI/(2 pi fc C) = 0.16 V; within 5 %
    // (common practice), back within 1 % after 1 ms
    for (const x of out(3e-3, 6e-3)) near(x, 5, 5e-2);
    for (const x of [...out(4e-3, 4.5e-3), ...out(5.5e-3, 6e-3)]) near(x, 5, 1e-2);
    const dev = Math.max(...out(3e-3, 3.5e-3).map((x) => Math.abs(x - 5)));
    expect(dev).toBeGreaterThan(0.01); // the step is visible
  });
});

describe('peak current mode: parameter validation', () => {
  it('rejects a non-positive sense gain, duty 1 on a boost, an unstable compensator', () => {
    const boost = buildStage({ kind: 'boost', switchingHz: FS, input: { volts: 5 }, inductor: { henries: 10e-6 }, outputCapacitor: { farads: 47e-6 }, load: { kind: 'resistor', ohms: 10 } });
    expect(() => peakCurrentMode(boost, { senseOhms: 0, command: { kind: 'fixed', volts: 1 } })).toThrow(/senseOhms: must be a finite number > 0/);
    expect(() => peakCurrentMode(boost, { senseOhms: 0.1, maxDuty: 1, command: { kind: 'fixed', volts: 1 } })).toThrow(/maxDuty: must be < 1 for a boost stage/);
    let err: unknown;
    try {
      peakCurrentMode(boost, {
        senseOhms: 0.1,
        command: { kind: 'voltage-loop', referenceVolts: 1, compensator: { kind: 'transfer-function', num: [1], den: [1, -100, 0] } },
      });
    } catch (e) {
      err = e;
    }
    expect(err).toBeInstanceOf(ParameterError);
    expect((err as ParameterError).issues[0]!.path).toBe('command.compensator.den');
    expect((err as Error).message).toMatch(/right half plane/);
  });
});
