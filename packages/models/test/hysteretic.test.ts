import { describe, expect, it } from 'vitest';
import { CircuitModel, simulate } from '@edgewise/engine';
import { closeLoop, type ClosedStage, type Stage } from '../src/stage.ts';
import { buildStage, type ConverterParams } from '../src/stages/index.ts';
import { hysteretic, type HystereticParams } from '../src/control/hysteretic.ts';

const VIN = 12, L = 4.7e-6, ESR = 0.05, VREF = 3.3, BAND = 0.04, RLOAD = 1;
/**
 * Ripple resistance: at the switching frequency the capacitance is nearly a short, so the
 * inductor ripple current divides between the ESR path and the load, and the output ripple is
 * (ESR || R) times the inductor ripple.
 */
const RRIP = (ESR * RLOAD) / (ESR + RLOAD);

function buck(extra: Partial<ConverterParams> = {}): Stage {
  // ESR-dominated output ripple: ESR C = 23.5 us is many switching periods
  return buildStage({
    kind: 'buck', rectification: 'synchronous', switchingHz: 500e3, input: { volts: VIN },
    inductor: { henries: L }, outputCapacitor: { farads: 470e-6, esrOhms: ESR },
    load: { kind: 'resistor', ohms: RLOAD }, initial: { outputVolts: VREF, inductorAmps: VREF },
    ...extra,
  });
}

interface Observed {
  readonly ons: number[];
  readonly vmin: number;
  readonly vmax: number;
  readonly imax: number;
}

function observe(closed: ClosedStage, fromS: number, stopS: number): Observed {
  const model = new CircuitModel(closed.circuit);
  const bit = 1 << model.circuit.devices.findIndex((d) => d.id === 'Q1');
  const ons: number[] = [];
  let vmin = Infinity, vmax = -Infinity, imax = -Infinity;
  const r = simulate(model, {
    stopS, timeBaseS: closed.timeBaseS, controller: closed.createController(),
    record: [closed.stage.signals.outputVoltage, closed.stage.signals.inductorCurrent],
    recordFromS: fromS, gridS: closed.stage.periodS / 50,
    sink: {
      // event samples on both sides and a fine grid: the extremes sit at the switching events
      sample(_t, v) {
        vmin = Math.min(vmin, v[0]!);
        vmax = Math.max(vmax, v[0]!);
        imax = Math.max(imax, v[1]!);
      },
    },
    trace: { switched: (t, b, a) => { if (t >= fromS && !(b & bit) && a & bit) ons.push(t); } },
  });
  expect(r.status).toBe('finished');
  return { ons, vmin, vmax, imax };
}

const frequency = (ons: readonly number[]): number => (ons.length - 1) / (ons[ons.length - 1]! - ons[0]!);
const base: HystereticParams = { referenceVolts: VREF, bandVolts: BAND };

describe('hysteretic control', () => {
  it('keeps the output inside the band and switches at Rrip Vo (1 - Vo/Vin) / (L band)', () => {
    const o = observe(closeLoop(buck(), hysteretic(buck(), base)), 0.1e-3, 0.2e-3);
    // a fact of the law with no delay: the switch turns at the thresholds, and with an
    // ESR-dominated ripple the output turns there too (1e-6 V: rounding of the located events)
    expect(o.vmin).toBeGreaterThanOrEqual(VREF - BAND / 2 - 1e-6);
    expect(o.vmax).toBeLessThanOrEqual(VREF + BAND / 2 + 1e-6);
    expect(o.vmin).toBeLessThan(VREF - BAND / 2 + 1e-4);
    expect(o.vmax).toBeGreaterThan(VREF + BAND / 2 - 1e-4);
    // common practice: with output ripple = Rrip x inductor ripple, the inductor ripple is
    // band / Rrip and f = Vo (1 - D) / (L band / Rrip). The capacitance adds ~ ton / (8 C ESR)
    // = 0.25 % to the ripple: 1 % tolerance.
    const f = (RRIP * VREF * (1 - VREF / VIN)) / (L * BAND);
    expect(Math.abs(frequency(o.ons) / f - 1)).toBeLessThan(0.01);
  });

  it('overshoots the band by the output slope times the comparator delay', () => {
    const td = 50e-9;
    const o = observe(closeLoop(buck(), hysteretic(buck(), { ...base, comparatorDelayS: td })), 0.1e-3, 0.2e-3);
    // first order (common practice): the output keeps moving at its ripple slope,
    // Rrip (Vin - Vo) / L rising and Rrip Vo / L falling, for td after each crossing; the
    // capacitive slope i_C / C adds ~1 % (i_C ~ 0.4 A at the turning points): 3 % tolerance
    const up = (RRIP * (VIN - VREF) * td) / L;
    const down = (RRIP * VREF * td) / L;
    expect(Math.abs((o.vmax - (VREF + BAND / 2)) / up - 1)).toBeLessThan(0.03);
    expect(Math.abs((VREF - BAND / 2 - o.vmin) / down - 1)).toBeLessThan(0.03);
  });

  it('limits the inductor current cycle by cycle', () => {
    const st = buck({ initial: { outputVolts: 0 } });
    const o = observe(closeLoop(st, hysteretic(st, { ...base, currentLimit: { peakAmps: 5, offTimeS: 0.3e-6 } })), 0, 0.05e-3);
    // a fact of the law: the guard opens the switch exactly at the limit
    expect(o.imax).toBeLessThanOrEqual(5 + 1e-9);
    expect(o.imax).toBeGreaterThan(4.99);
  });

  it('regulates with a diode rectifier in DCM at light load', () => {
    const st = buck({ rectification: 'diode', load: { kind: 'resistor', ohms: 30 }, initial: { outputVolts: VREF } });
    const o = observe(closeLoop(st, hysteretic(st, base)), 0.2e-3, 0.6e-3);
    // a fact of the law: the band holds in DCM too (the ripple is still ESR-dominated)
    expect(o.vmin).toBeGreaterThanOrEqual(VREF - BAND / 2 - 1e-6);
    expect(o.vmax).toBeLessThanOrEqual(VREF + BAND / 2 + 1e-6);
    expect(o.ons.length).toBeGreaterThan(5);
  });

  it('rejects bad parameters naming each one', () => {
    const st = buck();
    expect(() => hysteretic(st, { referenceVolts: 3.3, bandVolts: 0, comparatorDelayS: -1 })).toThrow(/bandVolts: must be a finite number > 0[\s\S]*comparatorDelayS: must be a finite number >= 0/);
    expect(() => hysteretic(st, { ...base, currentLimit: { peakAmps: 4, offTimeS: Number.NaN } })).toThrow(/currentLimit\.offTimeS/);
  });
});
