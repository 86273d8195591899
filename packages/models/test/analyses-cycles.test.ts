import { simulate, type Controller, type ElementSpec } from '@edgewise/engine';
import { describe, expect, it } from 'vitest';
import { measureCycles, periodicSteadyState, stepFigures, type SteadyState, type SwitchingSystem } from '../src/analyses/index.ts';
import { boostOpenLoop, buckCot, buckVm } from './analyses-fixtures.ts';

function steady(sys: SwitchingSystem, section?: Parameters<typeof periodicSteadyState>[1]): SteadyState {
  const r = periodicSteadyState(sys, section);
  if (r.status !== 'converged') throw new Error(r.message);
  return r;
}

/** Synchronous buck with complementary gates (no dead time) at a fixed duty: forced CCM. */
function syncBuck(duty: number, ohms: number): SwitchingSystem {
  const T = 10e-6;
  const els: ElementSpec[] = [
    { kind: 'voltage-source', id: 'VIN', pos: 'in', neg: '0', volts: 12 },
    { kind: 'switch', id: 'HS', drain: 'in', source: 'sw', gate: 'hs' },
    { kind: 'switch', id: 'LS', drain: 'sw', source: '0', gate: 'ls' },
    { kind: 'inductor', id: 'L', a: 'sw', b: 'out', henries: 10e-6 },
    { kind: 'capacitor', id: 'C', a: 'out', b: '0', farads: 50e-6 },
    { kind: 'resistor', id: 'R', a: 'out', b: '0', ohms },
  ];
  return {
    circuit: { elements: els },
    timeBaseS: T,
    createController: (): Controller => {
      let hs = -1, ls = -1;
      const clock = (ctx: Parameters<Controller['onEvent']>[0]): void => {
        ctx.setGate(ls, false);
        ctx.setGate(hs, true);
        ctx.at(0, ctx.cycle + 1, 0);
        ctx.at(1, ctx.cycle, duty * T);
      };
      return {
        start(ctx) {
          hs = ctx.gate('hs');
          ls = ctx.gate('ls');
          clock(ctx);
        },
        onEvent(ctx, tag) {
          if (tag === 0) clock(ctx);
          else {
            ctx.setGate(hs, false);
            ctx.setGate(ls, true);
          }
        },
      };
    },
  };
}

describe('per-cycle metrics', () => {
  it('averages, ripple and RMS of a CCM buck at steady state (volt-second and charge balance)', () => {
    // large output capacitor: the output ripple dV = dI T / (8 C) = 3.6e-4 V changes the
    // inductor slopes by at most dV / min(Vo, Vin - Vo) = 7.5e-5 relative: the tolerance of the
    // triangular-ripple formulas below is 1e-4
    const sys = buckVm({ c: 2e-3, r: 5, vc: 0.4 });
    const ss = steady(sys);
    const rep = measureCycles(sys, { stopS: 5e-5, signals: ['out', 'L.current', 'sw'], inductorCurrent: 'L.current', initialState: ss.state });
    const c = rep.cycles[rep.cycles.length - 1]!;
    const D = 0.4, vin = 12, L = 50e-6, T = 10e-6;
    // volt-second balance on L: <v_sw> = D Vin exactly and <vo> = <v_sw> for an ideal inductor
    // (Erickson and Maksimovic 2nd ed., ch. 2)
    expect(c.signals.sw!.average).toBeCloseTo(D * vin, 10);
    expect(c.signals.out!.average).toBeCloseTo(D * vin, 9);
    // charge balance on C: <iL> = <vo>/R (ibid.)
    expect(c.signals['L.current']!.average).toBeCloseTo(c.signals.out!.average / 5, 9);
    // triangular ripple: dI = (Vin - Vo) D T / L, RMS^2 = I^2 + dI^2 / 12 (ibid., ch. 2 and
    // analytic)
    const dI = ((vin - D * vin) * D * T) / L;
    expect(Math.abs(c.signals['L.current']!.ripple / dI - 1)).toBeLessThan(1e-4);
    const I = c.signals['L.current']!.average;
    expect(Math.abs(c.signals['L.current']!.rms / Math.sqrt(I * I + (dI * dI) / 12) - 1)).toBeLessThan(1e-4);
    // output ripple of the ideal capacitor: dI T / (8 C) (Erickson and Maksimovic ch. 2); exact
    // for a triangular capacitor current, so the same 1e-4 applies
    expect(Math.abs(c.signals.out!.ripple / ((dI * T) / (8 * 2e-3)) - 1)).toBeLessThan(1e-4);
    // switch node RMS of a 0/Vin pulse: Vin sqrt(D) (analytic)
    expect(c.signals.sw!.rms).toBeCloseTo(vin * Math.sqrt(D), 9);
    expect(c.duty).toBeCloseTo(D, 12);
    expect(c.switchingFrequencyHz).toBeCloseTo(1 / T, 3);
    expect(c.mode).toBe('ccm');
    expect(rep.audible).toBe(false);
  });

  it('finds the extremes inside segments (output with ESR) as a dense exact grid does', () => {
    const sys = buckVm({ esr: 0.05 });
    const ss = steady(sys);
    const T = sys.timeBaseS;
    const rep = measureCycles(sys, { stopS: T, signals: ['out'], initialState: ss.state });
    // independent: the engine's exact solution on a grid of T/20000 (grid error ~ f'' dt^2 / 2)
    let mn = Infinity, mx = -Infinity;
    simulate(sys.circuit, {
      stopS: T, timeBaseS: T, controller: sys.createController(), initialState: ss.state, record: ['out'], gridS: T / 20000,
      sink: { sample: (_t, v) => { mn = Math.min(mn, v[0]!); mx = Math.max(mx, v[0]!); } },
    });
    const c = rep.cycles[0]!.signals.out!;
    expect(Math.abs(c.max - mx)).toBeLessThan(1e-9 * mx);
    expect(Math.abs(c.min - mn)).toBeLessThan(1e-9 * mx);
  });

  it('names conduction modes: DCM, negative-current CCM, skipped cycles', () => {
    const boost = boostOpenLoop({ r: 200 });
    const dcm = measureCycles(boost, { stopS: 2e-5, signals: ['out'], inductorCurrent: 'L.current', initialState: steady(boost).state });
    expect(dcm.cycles.at(-1)!.mode).toBe('dcm');
    const light = syncBuck(0.4, 50);
    const neg = measureCycles(light, { stopS: 2e-5, signals: ['out'], inductorCurrent: 'L.current', initialState: steady(light).state });
    expect(neg.cycles.at(-1)!.mode).toBe('ccm-negative');
    const heavy = syncBuck(0.4, 1);
    const ccm = measureCycles(heavy, { stopS: 2e-5, signals: ['out'], inductorCurrent: 'L.current', initialState: steady(heavy).state });
    expect(ccm.cycles.at(-1)!.mode).toBe('ccm');
  });

  it('skipped cycles lower the switching frequency; below 20 kHz is flagged audible (common practice)', () => {
    const base = buckVm();
    const T = base.timeBaseS;
    // pulse skipping: only every 6th clock turns the gate on -> 100 kHz / 6 = 16.7 kHz
    const skip: SwitchingSystem = {
      ...base,
      createController: (): Controller => {
        let g = -1;
        return {
          start(ctx) {
            g = ctx.gate('g');
            ctx.at(0, 0, 0);
          },
          onEvent(ctx, tag) {
            if (tag === 0) {
              if (ctx.cycle % 6 === 0) {
                ctx.setGate(g, true);
                ctx.at(1, ctx.cycle, 0.3 * T);
              }
              ctx.at(0, ctx.cycle + 1, 0);
            } else ctx.setGate(g, false);
          },
        };
      },
    };
    const rep = measureCycles(skip, { stopS: 60 * T, signals: ['out'], inductorCurrent: 'L.current' });
    expect(rep.cycles[1]!.mode).toBe('skipped');
    expect(rep.cycles[1]!.switchingFrequencyHz).toBeNull();
    expect(rep.lowestFrequencyHz).toBeCloseTo(1 / (6 * T), 3);
    expect(rep.audible).toBe(true);
  });

  it('variable frequency: cycles between turn-ons match the shooting period (constant on-time)', () => {
    const sys = buckCot();
    const ss = steady(sys, { section: { kind: 'gate-on', gate: 'g' } });
    const rep = measureCycles(sys, { stopS: 1e-3, signals: ['out'], boundaries: { kind: 'gate-on', gate: 'g' }, inductorCurrent: 'L.current' });
    const last = rep.cycles.at(-1)!;
    expect(last.durationS).toBeCloseTo(ss.periodS, 14);
    expect(last.switchingFrequencyHz! * ss.periodS).toBeCloseTo(1, 9);
    // ideal buck volt-second balance: <vo> = Vin ton / T (Erickson and Maksimovic ch. 2)
    expect(last.signals.out!.average).toBeCloseTo((12 * 4e-6) / ss.periodS, 9);
    expect(rep.steadyStateCycle).not.toBeNull();
    // start-up: the first cycles run slower than steady state
    expect(rep.lowestFrequencyHz!).toBeLessThan(1 / ss.periodS);
  });

  it('reports the cycle where steady state was reached, and none for a run that is too short', () => {
    const sys = buckVm({ esr: 0.05 });
    const rep = measureCycles(sys, { stopS: 3e-3, signals: ['out'], steadyTolerance: 1e-6 });
    const k = rep.steadyStateCycle!;
    expect(k).toBeGreaterThan(10);
    const last = rep.cycles.at(-1)!.signals.out!.average;
    expect(Math.abs(rep.cycles[k]!.signals.out!.average - last)).toBeLessThan(1e-3);
    const short = measureCycles(sys, { stopS: 2e-4, signals: ['out'], steadyTolerance: 1e-6 });
    expect(short.steadyStateCycle).toBeNull();
  });

  it('rejects bad options naming the parameter', () => {
    const sys = buckVm();
    expect(() => measureCycles(sys, { stopS: -1, signals: ['out'] })).toThrow(/stopS/);
    expect(() => measureCycles(sys, { stopS: 1e-4, signals: [] })).toThrow(/signals/);
    expect(() => measureCycles(sys, { stopS: 1e-4, signals: ['nope'] })).toThrow(/signals: unknown signal "nope"/);
    expect(() => measureCycles(sys, { stopS: 1e-4, signals: ['out'], gate: 'zz' })).toThrow(/gate: unknown gate "zz"/);
  });
});

describe('step figures', () => {
  const t = Array.from({ length: 20001 }, (_, i) => i * 1e-5);
  it('first-order response: no overshoot, 2 % settling at tau ln 50 (analytic)', () => {
    const tau = 0.01;
    const v = t.map((x) => (x < 0.05 ? 0 : 1 - Math.exp(-(x - 0.05) / tau)));
    const f = stepFigures(t, v, { stepS: 0.05, final: 1 });
    expect(f.overshoot).toBe(0);
    expect(Math.abs(f.settlingTimeS! - tau * Math.log(50))).toBeLessThan(2e-5);
  });
  it('second-order response: overshoot exp(-zeta pi / sqrt(1 - zeta^2)) (analytic)', () => {
    const z = 0.3, wn = 2 * Math.PI * 50, wd = wn * Math.sqrt(1 - z * z);
    const v = t.map((x) => {
      const s = x - 0.05;
      return s < 0 ? 0 : 1 - Math.exp(-z * wn * s) * (Math.cos(wd * s) + (z / Math.sqrt(1 - z * z)) * Math.sin(wd * s));
    });
    const f = stepFigures(t, v, { stepS: 0.05, final: 1 });
    expect(f.overshoot).toBeCloseTo(Math.exp((-z * Math.PI) / Math.sqrt(1 - z * z)), 5);
    expect(() => stepFigures(t, v, { stepS: 10 })).toThrow(/stepS/);
  });
});
