import { describe, expect, it } from 'vitest';
import { simulate, type SampleSink } from '../src/index.ts';
import { buck, pwm } from './fixtures.ts';
import { runOdexBuck, type BuckNumbers } from './odex-reference.ts';

// Independent computation: odex integrating the same piecewise equations (see odex-reference.ts).
const base = { vin: 12, l: 4.7e-6, rl: 0.02, c: 22e-6, esr: 0.005, ron: 0.01, periodS: 2e-6, duty: 0.42 };

describe('engine against odex', () => {
  it('open-loop synchronous buck: states after 300 cycles agree to 1e-7 relative', () => {
    const p: BuckNumbers = { ...base, r: 2.5 };
    const cycles = 300;
    const ref = runOdexBuck(p, cycles);
    const r = simulate(buck({ load: 2.5 }), { stopS: cycles * p.periodS, timeBaseS: p.periodS, controller: pwm({ periodS: p.periodS, duty: p.duty, main: 'hs', sync: 'ls' }) });
    expect(r.status).toBe('finished');
    const iL = r.state[r.stateNames.indexOf('L1.current')]!;
    const vC = r.state[r.stateNames.indexOf('C1.charge')]!;
    expect(Math.abs(iL - ref.x[0]) / Math.abs(ref.x[0])).toBeLessThan(1e-7);
    expect(Math.abs(vC - ref.x[1]) / Math.abs(ref.x[1])).toBeLessThan(1e-7);
  });

  it('diode buck in DCM: states agree to 1e-7 relative and every zero-current event time to 1e-9 of the period', () => {
    const p: BuckNumbers = { ...base, r: 40, diode: { vf: 0.4, rd: 0.02 } };
    const cycles = 300;
    const ref = runOdexBuck(p, cycles);
    const events: number[] = [];
    let last = -1;
    const sink: SampleSink = {
      sample(t, values, _key, kind) {
        // diode D1 turns off when its current reaches zero: the inductor current sample at the event
        if (kind === 1 && Math.abs(values[0]!) < 1e-9 && values[1]! > 0) {
          const k = Math.floor(t / p.periodS + 1e-12);
          if (k !== last) {
            events[k] = t - k * p.periodS;
            last = k;
          }
        }
      },
    };
    const r = simulate(buck({ sync: false, load: 40, diode: { forwardVolts: 0.4, onOhms: 0.02 } }), {
      stopS: cycles * p.periodS,
      timeBaseS: p.periodS,
      controller: pwm({ periodS: p.periodS, duty: p.duty, main: 'hs' }),
      record: ['L1.current', 'D1.voltage'],
      sink,
    });
    expect(r.status).toBe('finished');
    const iL = r.state[r.stateNames.indexOf('L1.current')]!;
    const vC = r.state[r.stateNames.indexOf('C1.charge')]!;
    expect(iL).toBe(0);
    expect(ref.x[0]).toBe(0);
    expect(Math.abs(vC - ref.x[1]) / Math.abs(ref.x[1])).toBeLessThan(1e-7);
    let compared = 0;
    for (let k = 0; k < cycles; k++) {
      const want = ref.zeroCrossOffsets[k]!;
      if (Number.isNaN(want)) continue;
      expect(events[k], `cycle ${k}`).toBeDefined();
      expect(Math.abs(events[k]! - want) / p.periodS, `cycle ${k}`).toBeLessThan(1e-9);
      compared++;
    }
    expect(compared).toBeGreaterThan(250);
  });
});
