import { CircuitModel } from '@edgewise/engine';
import { describe, expect, it } from 'vitest';
import { buildStage, openLoopPwm, ParameterError, voltageMode, type CompensatorParams, type PwmController, type StageParams } from '../src/index.ts';
import { periodicState, runStage } from './support/run.ts';

const FS = 100e3;
const T = 1 / FS;
const VG = 12;

function near(a: number, b: number, rtol: number, atol = 0): void {
  expect(Math.abs(a - b), `${a} vs ${b}`).toBeLessThanOrEqual(rtol * Math.abs(b) + atol);
}

/** Synchronous buck with ideal switches and ideal (0 V) body diodes. */
function syncBuck(over: Partial<StageParams> = {}) {
  return buildStage({
    kind: 'buck', rectification: 'synchronous', switchingHz: FS, input: { volts: VG },
    inductor: { henries: 50e-6 }, outputCapacitor: { farads: 2e-3 },
    mainSwitch: { bodyDiode: { forwardVolts: 0 } }, syncSwitch: { bodyDiode: { forwardVolts: 0 } },
    load: { kind: 'resistor', ohms: 100 }, ...over,
  });
}

describe('diode emulation versus forced CCM at light load (facts of the trade)', () => {
  // Light load: K = 2L/(R Ts) = 0.1 below K_crit = 1 - D = 0.6 (Erickson & Maksimovic ch. 5).
  const d = 0.4, k = 0.1;
  const dt = { mainOffToSyncOnS: 50e-9, syncOffToMainOnS: 50e-9 };

  it('diode emulation: the zero-cross guard turns the synchronous switch off, the stage enters DCM with the diode-rectified M(D, K)', () => {
    const stage = syncBuck();
    const law = openLoopPwm(stage, { duty: d, deadTime: dt, lightLoad: 'diode-emulation' });
    // the dead time delays the main switch's turn-on by td_r (the inductor current is zero at
    // the clock edge, so nothing conducts meanwhile): effective duty D - td_r/Ts; during the
    // other dead time the ideal body diode carries the current as a diode would
    const de = d - dt.syncOffToMainOnS / T;
    const m = 2 / (1 + Math.sqrt(1 + (4 * k) / (de * de))); // buck DCM (Erickson & Maksimovic ch. 5)
    const x0 = periodicState(stage, law, { L1: 0, C1: m * VG });
    const run = runStage(stage, law, { cycles: 3, average: ['out'], record: ['L1.current'], initialState: x0 });
    // relative output ripple ~ 3e-5 (small-ripple DCM analysis); 1e-3 allowed as for the diode stage
    near(run.avg.out! / VG, m, 1e-3);
    const iL = run.samples.map((s) => s.v[0]!);
    expect(Math.min(...iL)).toBeGreaterThan(-1e-9); // never reverses
    expect(Math.abs(x0['L1.current']!)).toBeLessThan(1e-9); // zero at the clock edge: DCM
    expect((run.controller as PwmController).stats.zeroCrossTurnOffs).toBe(3);
  });

  it('forced CCM: the inductor current goes negative and the ratio stays D (exact for an ideal buck)', () => {
    const stage = syncBuck();
    const law = openLoopPwm(stage, { duty: d, lightLoad: 'forced-ccm' });
    const x0 = periodicState(stage, law, { L1: 0.048, C1: d * VG });
    const run = runStage(stage, law, { cycles: 3, average: ['out'], record: ['L1.current'], initialState: x0 });
    near(run.avg.out!, d * VG, 1e-9);
    // valley = V/R - (Vg - V) D Ts / (2L) = 0.048 - 0.288 A (Erickson & Maksimovic ch. 2; the
    // 2 mF output ripple bends the slopes by < 1e-4)
    const valley = Math.min(...run.samples.map((s) => s.v[0]!));
    near(valley, (d * VG) / 100 - ((VG - d * VG) * d * T) / (2 * 50e-6), 1e-3);
    expect(valley).toBeLessThan(-0.2);
  });

  it('forced CCM regulates a load that sinks current into the output; diode emulation cannot', () => {
    const comp: CompensatorParams = { kind: 'type-iii', r1: 10e3, r2: 4.9e3, c1: 16.2e-9, c2: 0.65e-9, r3: 352, c3: 4.52e-9 };
    const stage = buildStage({
      kind: 'buck', rectification: 'synchronous', switchingHz: FS, input: { volts: VG },
      inductor: { henries: 22e-6, seriesOhms: 0.02 }, outputCapacitor: { farads: 100e-6, esrOhms: 0.01 },
      load: { kind: 'current', amps: 1, steps: [{ atS: 1.5e-3, amps: -1 }] },
      initial: { outputVolts: 5, inductorAmps: 1 },
    });
    const loop = { referenceVolts: 2.5, feedbackGain: 0.5, maxDuty: 0.9, compensator: comp, initialControlVolts: 5 / VG };
    const run = runStage(stage, voltageMode(stage, { ...loop, lightLoad: 'forced-ccm' }), { cycles: 400, average: ['out', 'L1.current'], averageCycles: 1 });
    // integrator: no static error at periodic steady state (1e-4 for the residual transient);
    // charge balance on C1: <iL> = load current = -1 A exactly (circuit theory)
    near(run.avg.out!, 5, 1e-4);
    near(run.avg['L1.current']!, -1, 1e-4);
    const de = runStage(stage, voltageMode(stage, { ...loop, lightLoad: 'diode-emulation' }), { cycles: 250, average: ['out'], averageCycles: 10 });
    // with the synchronous switch off whenever the current would reverse, the 1 A pushed into
    // the output can only charge C1: the output rises far above its set point
    expect(de.avg.out!).toBeGreaterThan(5.5);
  });
});

describe('pulse skipping (fact of the trade)', () => {
  it('open loop: pulses shorter than the minimum on-time are skipped and counted', () => {
    const stage = syncBuck({ outputCapacitor: { farads: 100e-6 }, load: { kind: 'resistor', ohms: 10 } });
    const law = openLoopPwm(stage, { dutySchedule: [{ atS: 0, duty: 0.4 }, { atS: 20 * T, duty: 0.05 }], minOnTimeS: 1e-6, lightLoad: 'diode-emulation' });
    const run = runStage(stage, law, { cycles: 50, record: ['Q1.current'], recordFromS: 20 * T + 1e-9, initialState: { C1: 4.8 } });
    const st = (run.controller as PwmController).stats;
    expect(st.cycles).toBe(50);
    expect(st.skippedCycles).toBe(30);
    // the main switch never conducts after the change
    expect(Math.max(...run.samples.map((s) => Math.abs(s.v[0]!)))).toBe(0);
  });

  it('voltage mode at very light load: cycles below the skip level are skipped and the output stays regulated', () => {
    const comp: CompensatorParams = { kind: 'type-iii', r1: 10e3, r2: 4.9e3, c1: 16.2e-9, c2: 0.65e-9, r3: 352, c3: 4.52e-9 };
    const stage = buildStage({
      kind: 'buck', rectification: 'synchronous', switchingHz: FS, input: { volts: VG },
      inductor: { henries: 22e-6 }, outputCapacitor: { farads: 100e-6, esrOhms: 0.01 },
      load: { kind: 'resistor', ohms: 500 }, initial: { outputVolts: 5 },
    });
    const law = voltageMode(stage, {
      referenceVolts: 2.5, feedbackGain: 0.5, maxDuty: 0.9, compensator: comp, skipBelowVolts: 0.1,
      lightLoad: 'diode-emulation', initialControlVolts: 0.1,
    });
    const run = runStage(stage, law, { cycles: 1000, average: ['out'], averageCycles: 200, record: ['out'], recordFromS: 800 * T });
    const st = (run.controller as PwmController).stats;
    expect(st.skippedCycles).toBeGreaterThan(0.3 * st.cycles);
    // regulated: within 2 % over the last 200 cycles (common practice for light-load modes)
    for (const s of run.samples) near(s.v[0]!, 5, 2e-2);
    near(run.avg.out!, 5, 1e-2);
  });
});

describe('break-before-make dead time', () => {
  it('the gates are never on together and the body diode carries the current during each dead time: <v> = (D Ts - td_r) Vg / Ts - Vf (td_f + td_r) / Ts', () => {
    const tdf = 80e-9, tdr = 120e-9, vf = 0.7, d = 0.5;
    const stage = buildStage({
      kind: 'buck', rectification: 'synchronous', switchingHz: FS, input: { volts: VG },
      inductor: { henries: 50e-6 }, outputCapacitor: { farads: 2e-3 }, load: { kind: 'resistor', ohms: 2 },
      syncSwitch: { bodyDiode: { forwardVolts: vf } },
    });
    const law = openLoopPwm(stage, { duty: d, deadTime: { mainOffToSyncOnS: tdf, syncOffToMainOnS: tdr } });
    const x0 = periodicState(stage, law, { L1: 3, C1: 6 });
    const run = runStage(stage, law, { cycles: 2, average: ['out'], record: ['sw'], initialState: x0 });
    // exact for ideal switches and an inductor current positive at both transitions
    // (inductor volt-second balance, Erickson & Maksimovic ch. 2)
    near(run.avg.out!, ((d * T - tdr) * VG) / T - (vf * (tdf + tdr)) / T, 1e-9);
    const devices = new CircuitModel(stage.circuit).circuit.devices.map((x) => x.id);
    const q1 = devices.indexOf('Q1'), q2 = devices.indexOf('Q2');
    for (const s of run.samples) expect(((s.key >>> q1) & 1) === 1 && ((s.key >>> q2) & 1) === 1).toBe(false);
    // the switch node sits at -Vf during the dead times
    expect(run.samples.some((s) => Math.abs(s.v[0]! + vf) < 1e-9)).toBe(true);
  });
});

describe('open-loop PWM and dead-time validation', () => {
  const boost = buildStage({ kind: 'boost', switchingHz: FS, input: { volts: 5 }, inductor: { henries: 10e-6 }, outputCapacitor: { farads: 47e-6 }, load: { kind: 'resistor', ohms: 10 } });
  const buck = syncBuck();
  const cases: [() => unknown, RegExp][] = [
    [() => openLoopPwm(buck, { duty: 1.2 }), /duty: must be a number in \[0, 1\] \(got 1\.2\)/],
    [() => openLoopPwm(buck, { duty: -0.1 }), /duty: must be a number in \[0, 1\]/],
    [() => openLoopPwm(boost, { duty: 1 }), /duty: must be < 1 for a boost stage/],
    [() => openLoopPwm(boost, { dutySchedule: [{ atS: 0, duty: 0.5 }, { atS: 1e-3, duty: 1 }] }), /dutySchedule\[1\]\.duty: must be < 1 for a boost stage/],
    [() => openLoopPwm(buck, { duty: 0.5, deadTime: { mainOffToSyncOnS: 2 * T } }), /deadTime\.mainOffToSyncOnS: must be shorter than the switching period/],
    [() => openLoopPwm(buck, { duty: 0.5, deadTime: { syncOffToMainOnS: 0.6 * T, mainOffToSyncOnS: 0.6 * T } }), /deadTime: the two dead times together must be shorter/],
    [() => openLoopPwm(boost, { duty: 0.5, lightLoad: 'forced-ccm' }), /lightLoad: 'forced-ccm' needs a synchronous stage/],
    [() => openLoopPwm(boost, { duty: 0.5, deadTime: { mainOffToSyncOnS: 1e-7 } }), /deadTime: applies to synchronous stages only/],
    [() => openLoopPwm(buck, { duty: 0.5, minOnTimeS: T }), /minOnTimeS: must be shorter than the switching period/],
    [() => openLoopPwm(buck, { duty: 0.5, currentLimit: { amps: 0 } }), /currentLimit\.amps: must be a finite number > 0/],
    [() => openLoopPwm(buck, {}), /duty: give exactly one of duty and dutySchedule/],
  ];
  it('names the parameter and the reason', () => {
    for (const [f, re] of cases) {
      let err: unknown;
      try {
        f();
      } catch (e) {
        err = e;
      }
      expect(err, String(re)).toBeInstanceOf(ParameterError);
      expect((err as Error).message).toMatch(re);
    }
  });
});
