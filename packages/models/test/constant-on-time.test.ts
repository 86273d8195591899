import { describe, expect, it } from 'vitest';
import { CircuitModel, simulate } from '@edgewise/engine';
import { closeLoop, type ClosedStage, type Stage } from '../src/stage.ts';
import { buildStage, type ConverterParams } from '../src/stages/index.ts';
import { constantOnTime, type ConstantOnTimeParams } from '../src/control/constant-on-time.ts';

const VIN = 12;

function buck(extra: Partial<ConverterParams> & { load: ConverterParams['load'] }): Stage {
  return buildStage({
    kind: 'buck', rectification: 'synchronous', switchingHz: 500e3, input: { volts: VIN },
    inductor: { henries: 4.7e-6 }, outputCapacitor: { farads: 100e-6, esrOhms: 0.02 },
    ...extra,
  });
}

interface Observed {
  /** Main-switch turn-on instants in the window, seconds. */
  readonly ons: number[];
  readonly offs: number[];
  readonly meanVout: number;
  readonly maxIL: number;
}

/** Runs to stopS; records main-switch edges and the mean output voltage over [fromS, stopS]. */
function observe(closed: ClosedStage, fromS: number, stopS: number): Observed {
  const model = new CircuitModel(closed.circuit);
  const bit = 1 << model.circuit.devices.findIndex((d) => d.id === 'Q1');
  const ons: number[] = [], offs: number[] = [];
  let maxIL = -Infinity;
  const run = (until: number, sinkOn: boolean) =>
    simulate(model, {
      stopS: until, timeBaseS: closed.timeBaseS, controller: closed.createController(),
      integrals: [{ name: 'v', of: closed.stage.signals.outputVoltage }],
      record: [closed.stage.signals.inductorCurrent],
      ...(sinkOn ? { sink: { sample: (t: number, v: Float64Array) => { if (t >= fromS) maxIL = Math.max(maxIL, v[0]!); } } } : {}),
      trace: sinkOn ? { switched: (t, b, a) => { if (t < fromS) return; if (!(b & bit) && a & bit) ons.push(t); if (b & bit && !(a & bit)) offs.push(t); } } : {},
    });
  // runs are deterministic, so the window mean is the difference of two exact integrals
  const r0 = run(fromS, false);
  const r1 = run(stopS, true);
  expect(r1.status).toBe('finished');
  return { ons, offs, meanVout: (r1.integrals.v! - r0.integrals.v!) / (stopS - fromS), maxIL };
}

/** Mean switching frequency over whole cycles between the first and last turn-on, hertz. */
const frequency = (ons: readonly number[]): number => (ons.length - 1) / (ons[ons.length - 1]! - ons[0]!);

const base: ConstantOnTimeParams = { referenceVolts: 3.3, onTime: { kind: 'fixed', seconds: 0.5e-6 }, minOffTimeS: 0.1e-6 };

describe('constant on-time', () => {
  it('switches at Vo / (Vin ton) in CCM (ideal synchronous buck)', () => {
    const stage = buck({ load: { kind: 'resistor', ohms: 1 }, initial: { outputVolts: 3.3, inductorAmps: 3.3 } });
    const ton = 0.5e-6;
    const o = observe(closeLoop(stage, constantOnTime(stage, { ...base, diodeEmulation: false })), 0.2e-3, 0.4e-3);
    // common practice, from volt-second balance of the ideal buck in CCM (Erickson and
    // Maksimovic, 2nd ed., sec. 2.2: D = V / Vg) with D = ton f. Ideal parts: exact up to the
    // frequency averaging over a whole number of cycles in a steady state.
    const expected = o.meanVout / (VIN * ton);
    expect(o.ons.length).toBeGreaterThan(50);
    expect(frequency(o.ons) / expected).toBeCloseTo(1, 3);
    // each on-time lasts exactly ton (a fact of the law)
    for (let k = 0; k < o.offs.length && k < o.ons.length; k++) expect(o.offs[k]! - o.ons[k]!).toBeCloseTo(ton, 15);
    // valley regulation: the mean output sits within the ESR ripple above the reference
    expect(o.meanVout).toBeGreaterThan(3.3);
    expect(o.meanVout).toBeLessThan(3.3 + 0.02 * 1.0);
  });

  it('is capped at 1 / (ton + toff,min) when the reference cannot be reached', () => {
    const ton = 0.5e-6, toff = 0.3e-6;
    // started at the expected operating point so the lightly damped output filter has settled
    const stage = buck({ load: { kind: 'resistor', ohms: 2 }, initial: { outputVolts: 7.5, inductorAmps: 3.75 } });
    const o = observe(closeLoop(stage, constantOnTime(stage, { ...base, referenceVolts: 10, minOffTimeS: toff })), 0.1e-3, 0.2e-3);
    // analytic (definition of the law): the output stays below the reference, so every on-time
    // starts as soon as the minimum off-time ends
    expect(frequency(o.ons) * (ton + toff)).toBeCloseTo(1, 9);
    // volt-second balance (Erickson and Maksimovic sec. 2.2): Vo = D Vin with D = ton / (ton + toff)
    expect(o.meanVout / (VIN * ton / (ton + toff))).toBeCloseTo(1, 2);
  });

  it('lowers the frequency at light load in DCM with diode emulation, and not in forced CCM', () => {
    const R = 50, L = 4.7e-6, ton = 0.5e-6;
    const stage = buck({ load: { kind: 'resistor', ohms: R }, initial: { outputVolts: 3.3 } });
    const dcm = observe(closeLoop(stage, constantOnTime(stage, { ...base, diodeEmulation: true })), 0.5e-3, 1.5e-3);
    const ccm = observe(closeLoop(stage, constantOnTime(stage, { ...base, diodeEmulation: false })), 0.5e-3, 1.5e-3);
    const vo = dcm.meanVout, io = vo / R;
    // analytic DCM charge balance of the ideal buck: each pulse peaks at Ipk = (Vin - Vo) ton / L,
    // falls to zero in ton (Vin - Vo) / Vo and so carries Ipk ton Vin / (2 Vo); f = Io / that.
    // First order in the output ripple (Vo taken as its mean; ripple ~ 1 % here): 3 % tolerance.
    const fDcm = (2 * L * io * vo) / ((VIN - vo) * ton * ton * VIN);
    expect(frequency(dcm.ons) / fDcm).toBeCloseTo(1, 1);
    expect(Math.abs(frequency(dcm.ons) / fDcm - 1)).toBeLessThan(0.03);
    // common practice: forced CCM keeps f = Vo / (Vin ton) at any load
    expect(frequency(ccm.ons) / (ccm.meanVout / (VIN * ton))).toBeCloseTo(1, 2);
    expect(frequency(dcm.ons)).toBeLessThan(0.2 * frequency(ccm.ons));
  });

  it('forces a pulse after 1 / minFrequencyHz without one', () => {
    const stage = buck({ load: { kind: 'resistor', ohms: 2000 }, initial: { outputVolts: 3.3 } });
    const fmin = 25e3;
    const o = observe(closeLoop(stage, constantOnTime(stage, { ...base, minFrequencyHz: fmin })), 0.2e-3, 1.2e-3);
    // a fact of the law: no gap between on-times exceeds 1 / fmin
    for (let k = 1; k < o.ons.length; k++) expect(o.ons[k]! - o.ons[k - 1]!).toBeLessThanOrEqual(1 / fmin + 1e-15);
    expect(o.ons.length).toBeGreaterThanOrEqual(25);
  });

  it('ends the on-time at the current limit', () => {
    const stage = buck({ load: { kind: 'resistor', ohms: 0.3 }, initial: { outputVolts: 0 } });
    const o = observe(closeLoop(stage, constantOnTime(stage, { ...base, onTime: { kind: 'fixed', seconds: 1e-6 }, currentLimit: { peakAmps: 6 } })), 0.05e-3, 0.15e-3);
    // a fact of the law: the guard opens the switch exactly at the limit
    expect(o.maxIL).toBeLessThanOrEqual(6 + 1e-9);
    expect(o.maxIL).toBeGreaterThan(5.99);
  });

  it('adapts the on-time to keep the CCM frequency near its target', () => {
    const stage = buck({ load: { kind: 'resistor', ohms: 1 }, initial: { outputVolts: 3.3, inductorAmps: 3.3 } });
    const o = observe(closeLoop(stage, constantOnTime(stage, { ...base, onTime: { kind: 'adaptive', frequencyHz: 400e3 }, diodeEmulation: false })), 0.2e-3, 0.4e-3);
    // ton = Vo / (Vin f) measured at each turn-on, and f = D / ton (common practice): the
    // frequency differs from the target only by the output ripple seen at the valley (~ 0.3 %)
    expect(frequency(o.ons) / 400e3).toBeCloseTo(1, 1);
    expect(Math.abs(frequency(o.ons) / 400e3 - 1)).toBeLessThan(0.02);
  });

  it('regulates a boost and an inverting buck-boost at the reference (valley)', () => {
    for (const kind of ['boost', 'buck-boost'] as const) {
      const stage = buildStage({
        kind, rectification: 'diode', switchingHz: 300e3, input: { volts: 5 }, inductor: { henries: 10e-6 },
        outputCapacitor: { farads: 47e-6, esrOhms: 0.03 }, load: { kind: 'resistor', ohms: 20 },
        initial: { outputVolts: kind === 'boost' ? 9 : -9 },
      });
      const o = observe(closeLoop(stage, constantOnTime(stage, { referenceVolts: 9, onTime: { kind: 'fixed', seconds: 1e-6 }, minOffTimeS: 0.2e-6 })), 0.5e-3, 1e-3);
      // a fact of the law: on-times start at the reference crossing, so the mean output stays
      // within the output ripple of the reference (ESR ripple 0.03 ohm x ~2 A peak here: 1 %)
      const fb = kind === 'boost' ? o.meanVout : -o.meanVout;
      expect(Math.abs(fb / 9 - 1)).toBeLessThan(0.01);
      expect(o.ons.length).toBeGreaterThan(20);
    }
  });

  it('regulates with current or ramp ripple injection', () => {
    // a nearly ESR-free output capacitor: the injected ripple provides the valley signal
    const stage = buck({ outputCapacitor: { farads: 100e-6, esrOhms: 0.001 }, load: { kind: 'resistor', ohms: 1 }, initial: { outputVolts: 3.3, inductorAmps: 3.3 } });
    const rInj = 0.02;
    const cur = observe(closeLoop(stage, constantOnTime(stage, { ...base, rippleInjection: { kind: 'current', ohms: rInj }, diodeEmulation: false })), 0.3e-3, 0.5e-3);
    // first order (common practice): turn-on happens when vo + Rinj iL falls to the reference at
    // the current valley, Io - dI/2, so the output sits ~ Rinj (Io - dI/2) below it
    // (dI = (Vin - Vo) ton / L = 0.93 A): within the capacitive ripple, 5 mV
    const dI = ((VIN - 3.3) * 0.5e-6) / 4.7e-6;
    expect(Math.abs(cur.meanVout - (3.3 - rInj * (cur.meanVout / 1 - dI / 2)))).toBeLessThan(5e-3);
    expect(frequency(cur.ons) / (cur.meanVout / (VIN * 0.5e-6))).toBeCloseTo(1, 2);
    const ramp = observe(closeLoop(stage, constantOnTime(stage, { ...base, rippleInjection: { kind: 'ramp', voltsPerS: 20e3 }, diodeEmulation: false })), 0.3e-3, 0.5e-3);
    // common practice: CCM frequency D / ton whatever the valley signal
    expect(frequency(ramp.ons) / (ramp.meanVout / (VIN * 0.5e-6))).toBeCloseTo(1, 2);
    // a fact of the law: at each turn-on vo - slope toff = reference, so the output sits above
    // the reference by slope toff plus at most its capacitive ripple dI T / (8 C) (~2 mV)
    const period = 1 / frequency(ramp.ons);
    const lift = 20e3 * (period - 0.5e-6);
    const ripple = (dI * period) / (8 * 100e-6);
    expect(ramp.meanVout - 3.3).toBeGreaterThan(lift - ripple);
    expect(ramp.meanVout - 3.3).toBeLessThan(lift + ripple);
  });

  it('rejects bad parameters naming each one', () => {
    const stage = buck({ load: { kind: 'resistor', ohms: 1 } });
    expect(() => constantOnTime(stage, { referenceVolts: Number.NaN, onTime: { kind: 'fixed', seconds: -1 }, minOffTimeS: 0 })).toThrow(
      /referenceVolts: must be a finite number[\s\S]*onTime\.seconds: must be a finite number > 0[\s\S]*minOffTimeS/,
    );
    expect(() => constantOnTime(stage, { ...base, minFrequencyHz: 2e6 })).toThrow(/minFrequencyHz: must be below 1 \/ \(onTime.seconds \+ minOffTimeS\)/);
    expect(() => constantOnTime(stage, { ...base, deadTimeS: -1e-9 })).toThrow(/deadTimeS/);
  });
});
