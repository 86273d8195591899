import { describe, expect, it } from 'vitest';
import { CircuitModel, simulate, type SampleSink } from '../src/index.ts';
import { buck, pwm } from './fixtures.ts';

const T = 2e-6;

/** Collects, per device, the intervals during which it conducts (from event samples). */
function conduction(model: CircuitModel, device: string, from: number) {
  const bit = model.circuit.devices.findIndex((d) => d.id === device);
  const intervals: [number, number][] = [];
  let onSince = -1;
  const values: { t: number; v: number[] }[] = [];
  const sink: SampleSink = {
    sample(t, v, key, kind) {
      if (t < from) return;
      values.push({ t, v: Array.from(v) });
      if (kind !== 2) return;
      const on = ((key >>> bit) & 1) === 1;
      if (on && onSince < 0) onSince = t;
      if (!on && onSince >= 0) {
        intervals.push([onSince, t]);
        onSince = -1;
      }
    },
  };
  return { sink, intervals, values };
}

describe('dead time', () => {
  it('the low-side body diode carries the inductor current for exactly each dead time, at minus its drop (common practice)', () => {
    const td = 25e-9;
    const spec = buck({ body: { forwardVolts: 0.7 } });
    const model = new CircuitModel(spec);
    const col = conduction(model, 'LS.body', 200 * T);
    const r = simulate(model, {
      stopS: 220 * T, timeBaseS: T,
      controller: pwm({ periodS: T, duty: 0.42, main: 'hs', sync: 'ls', deadS: td }),
      record: ['sw', 'LS.body.current', 'L1.current'], sink: col.sink,
    });
    expect(r.status).toBe('finished');
    // two dead times per cycle (before the high side turns on and after it turns off)
    expect(col.intervals.length).toBeGreaterThanOrEqual(38);
    for (const [a, b] of col.intervals) expect(Math.abs(b - a - td)).toBeLessThan(1e-12 * T);
    // during conduction the switch node sits at -Vf (diode with zero resistance); diode current = inductor current
    const during = col.values.filter((s) => col.intervals.some(([a, b]) => s.t > a && s.t < b));
    void during;
    const at = col.values.filter((s) => col.intervals.some(([a]) => s.t === a));
    expect(at.length).toBeGreaterThan(0);
    for (const s of col.values) {
      if (Math.abs(s.v[0]! + 0.7) < 1e-9) expect(Math.abs(s.v[1]! - s.v[2]!)).toBeLessThan(1e-9);
    }
    expect(col.values.filter((s) => Math.abs(s.v[0]! + 0.7) < 1e-12).length).toBeGreaterThanOrEqual(col.intervals.length);
  });
});

describe('light load', () => {
  it('forced-CCM synchronous buck: the inductor current goes negative in every cycle (a fact of the trade)', () => {
    let min = Infinity;
    let cyclesNeg = new Set<number>();
    const sink: SampleSink = {
      sample(t, v) {
        if (t < 400 * T) return;
        if (v[0]! < min) min = v[0]!;
        if (v[0]! < 0) cyclesNeg.add(Math.floor(t / T + 1e-9));
      },
    };
    const r = simulate(buck({ load: 40 }), {
      stopS: 500 * T, timeBaseS: T, controller: pwm({ periodS: T, duty: 0.42, main: 'hs', sync: 'ls' }),
      record: ['L1.current'], sink,
    });
    expect(r.status).toBe('finished');
    // ripple (Vin - V) D T / L = (12 - 5.04) 0.42 2e-6 / 4.7e-6 ~ 1.24 A peak-to-peak around 0.126 A average
    expect(min).toBeLessThan(-0.4);
    expect(cyclesNeg.size).toBeGreaterThanOrEqual(99);
  });

  it('diode buck at the same load enters DCM: the inductor current stays at zero for the rest of the cycle', () => {
    const zeroSpans: number[] = [];
    let zeroSince = -1;
    let minCurrent = Infinity;
    let gridInSpans = 0;
    const sink: SampleSink = {
      sample(t, v, _key, kind) {
        if (v[0]! < minCurrent) minCurrent = v[0]!;
        const idle = v[1]! > 1 && v[1]! < 11; // switch node at the output voltage: neither switch nor diode conducts
        if (kind === 0) {
          if (zeroSince >= 0 && idle) {
            expect(v[0]).toBe(0);
            gridInSpans++;
          }
          return;
        }
        if (kind !== 2) return;
        if (idle && zeroSince < 0) zeroSince = t;
        if (!idle && zeroSince >= 0) {
          zeroSpans.push(t - zeroSince);
          expect(t / T - Math.round(t / T)).toBeCloseTo(0, 9); // ends at a clock edge
          zeroSince = -1;
        }
      },
    };
    const r = simulate(buck({ sync: false, load: 40 }), {
      stopS: 500 * T, timeBaseS: T, controller: pwm({ periodS: T, duty: 0.42, main: 'hs' }),
      record: ['L1.current', 'sw'], sink, gridS: T / 50, recordFromS: 400 * T,
    });
    expect(r.message).toBe('reached the stop time');
    expect(minCurrent).toBeGreaterThan(-1e-12); // the located zero crossing itself, to rounding
    expect(zeroSpans.length).toBeGreaterThanOrEqual(99);
    for (const s of zeroSpans) expect(s).toBeGreaterThan(0.1 * T);
    expect(gridInSpans).toBeGreaterThan(500);
  });
});
