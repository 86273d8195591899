import { describe, expect, it } from 'vitest';
import { simulate, type CircuitSpec, type SampleSink } from '../src/index.ts';

// Reference values: first- and second-order circuit responses from circuit theory
// (Nilsson and Riedel, Electric Circuits, chapters 7-8: natural and step responses of RL, RC
// and series RLC circuits; sinusoidal forcing by the same method with the particular solution
// from phasor analysis, chapter 9).

const RTOL = 1e-9;

function sampled(spec: CircuitSpec, stopS: number, gridS: number, record: string[]): { t: number[]; v: number[][] } {
  const t: number[] = [];
  const v: number[][] = [];
  const sink: SampleSink = {
    sample(time, values, _key, kind) {
      if (kind !== 0) return;
      t.push(time);
      v.push(Array.from(values));
    },
  };
  const r = simulate(spec, { stopS, gridS, record, sink, timeBaseS: gridS });
  expect(r.status).toBe('finished');
  return { t, v };
}

function expectClose(got: number, want: number, scale: number): void {
  expect(Math.abs(got - want)).toBeLessThanOrEqual(RTOL * scale);
}

describe('RC circuit', () => {
  const R = 1e3, C = 1e-6, V = 10, tau = R * C;
  it('step response v_C = V (1 - exp(-t/RC)) (closed form)', () => {
    const spec: CircuitSpec = {
      elements: [
        { kind: 'voltage-source', id: 'V1', pos: 'in', neg: '0', volts: V },
        { kind: 'resistor', id: 'R1', a: 'in', b: 'out', ohms: R },
        { kind: 'capacitor', id: 'C1', a: 'out', b: '0', farads: C },
      ],
    };
    const { t, v } = sampled(spec, 5 * tau, tau / 20, ['out', 'R1.current']);
    expect(t.length).toBe(101);
    t.forEach((ti, i) => {
      expectClose(v[i]![0]!, V * (1 - Math.exp(-ti / tau)), V);
      expectClose(v[i]![1]!, (V / R) * Math.exp(-ti / tau), V / R);
    });
  });
  it('sine response v_C = V/(1+(w tau)^2) (sin wt - w tau cos wt + w tau e^-t/tau) (closed form)', () => {
    const f = 300, w = 2 * Math.PI * f;
    const spec: CircuitSpec = {
      elements: [
        { kind: 'voltage-source', id: 'V1', pos: 'in', neg: '0', volts: 0, sine: { amplitude: V, frequencyHz: f } },
        { kind: 'resistor', id: 'R1', a: 'in', b: 'out', ohms: R },
        { kind: 'capacitor', id: 'C1', a: 'out', b: '0', farads: C },
      ],
    };
    const { t, v } = sampled(spec, 4 / f, 1 / f / 50, ['out']);
    const wt = w * tau;
    t.forEach((ti, i) => {
      const want = (V / (1 + wt * wt)) * (Math.sin(w * ti) - wt * Math.cos(w * ti) + wt * Math.exp(-ti / tau));
      expectClose(v[i]![0]!, want, V);
    });
  });
});

describe('RL circuit', () => {
  const R = 2, L = 1e-3, V = 5, tau = L / R;
  it('step response i = V/R (1 - exp(-R t / L)) (closed form)', () => {
    const spec: CircuitSpec = {
      elements: [
        { kind: 'voltage-source', id: 'V1', pos: 'in', neg: '0', volts: V },
        { kind: 'resistor', id: 'R1', a: 'in', b: 'x', ohms: R },
        { kind: 'inductor', id: 'L1', a: 'x', b: '0', henries: L },
      ],
    };
    const { t, v } = sampled(spec, 6 * tau, tau / 16, ['L1.current', 'x']);
    t.forEach((ti, i) => {
      expectClose(v[i]![0]!, (V / R) * (1 - Math.exp(-ti / tau)), V / R);
      expectClose(v[i]![1]!, V * Math.exp(-ti / tau), V);
    });
  });
  it('sine response i = V/(R^2 + w^2 L^2) (R sin wt - wL cos wt + wL e^{-Rt/L}) (closed form)', () => {
    const f = 1e3, w = 2 * Math.PI * f;
    const spec: CircuitSpec = {
      elements: [
        { kind: 'voltage-source', id: 'V1', pos: 'in', neg: '0', volts: 0, sine: { amplitude: V, frequencyHz: f } },
        { kind: 'resistor', id: 'R1', a: 'in', b: 'x', ohms: R },
        { kind: 'inductor', id: 'L1', a: 'x', b: '0', henries: L },
      ],
    };
    const { t, v } = sampled(spec, 3 / f, 1 / f / 40, ['L1.current']);
    const den = R * R + w * w * L * L;
    t.forEach((ti, i) => {
      const want = (V / den) * (R * Math.sin(w * ti) - w * L * Math.cos(w * ti) + w * L * Math.exp(-ti / tau));
      expectClose(v[i]![0]!, want, V / R);
    });
  });
});

describe('series RLC circuit', () => {
  const R = 10, L = 1e-3, C = 1e-6, V = 1;
  const alpha = R / (2 * L);
  const w0 = 1 / Math.sqrt(L * C);
  const wd = Math.sqrt(w0 * w0 - alpha * alpha);
  const spec = (src: CircuitSpec['elements'][number]): CircuitSpec => ({
    elements: [
      src,
      { kind: 'resistor', id: 'R1', a: 'in', b: 'a', ohms: R },
      { kind: 'inductor', id: 'L1', a: 'a', b: 'b', henries: L },
      { kind: 'capacitor', id: 'C1', a: 'b', b: '0', farads: C },
    ],
  });
  it('underdamped step response v_C = V [1 - e^{-at}(cos wd t + a/wd sin wd t)] (closed form)', () => {
    const { t, v } = sampled(spec({ kind: 'voltage-source', id: 'V1', pos: 'in', neg: '0', volts: V }), 2e-3, 1e-5, ['b', 'L1.current']);
    t.forEach((ti, i) => {
      const e = Math.exp(-alpha * ti);
      expectClose(v[i]![0]!, V * (1 - e * (Math.cos(wd * ti) + (alpha / wd) * Math.sin(wd * ti))), V);
      // i = C dv/dt = V C e^{-at} (w0^2 / wd) sin(wd t)
      expectClose(v[i]![1]!, V * C * e * (w0 * w0 / wd) * Math.sin(wd * ti), V * C * w0);
    });
  });
  it('sine response: particular (phasor) plus homogeneous solution (closed form)', () => {
    const f = 3e3, w = 2 * Math.PI * f;
    const { t, v } = sampled(spec({ kind: 'voltage-source', id: 'V1', pos: 'in', neg: '0', volts: 0, sine: { amplitude: V, frequencyHz: f } }), 2e-3, 1e-5, ['b']);
    // q'' + 2 alpha q' + w0^2 q = (V/L) sin wt; q(0) = q'(0) = 0
    const zr = w0 * w0 - w * w, zi = 2 * alpha * w, zz = zr * zr + zi * zi;
    // q_p = Im[(V/L) e^{jwt} / Z] = (V/L)(zr sin wt - zi cos wt)/|Z|^2
    const qp = (s: number): number => (V / L) * (zr * Math.sin(w * s) - zi * Math.cos(w * s)) / zz;
    const dqp0 = (V / L) * (zr * w) / zz;
    const c1 = -qp(0);
    const c2 = (alpha * c1 - dqp0) / wd;
    t.forEach((ti, i) => {
      const q = qp(ti) + Math.exp(-alpha * ti) * (c1 * Math.cos(wd * ti) + c2 * Math.sin(wd * ti));
      expectClose(v[i]![0]!, q / C, V * 5);
    });
  });
});
