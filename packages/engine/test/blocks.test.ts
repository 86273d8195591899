import { describe, expect, it } from 'vitest';
import { simulate, type CircuitSpec, type Controller, type SampleSink } from '../src/index.ts';

// Signal blocks, controlled sources, source steps and measurements against closed forms
// (linear systems theory: first-order step response y = K (1 - e^{-t/tau}); Ohm's law).

function grid(spec: CircuitSpec, stopS: number, gridS: number, record: string[], controller?: Controller, timeBaseS = gridS) {
  const rows: { t: number; v: number[] }[] = [];
  const sink: SampleSink = {
    sample(t, v, _k, kind) {
      if (kind === 0) rows.push({ t, v: Array.from(v) });
    },
  };
  const r = simulate(spec, { stopS, gridS, record, sink, timeBaseS, ...(controller ? { controller } : {}) });
  expect(r.status, r.message).toBe('finished');
  return rows;
}

describe('linear blocks and controlled sources', () => {
  it('a first-order transfer function K/(tau s + 1) driven by a node, feeding a controlled voltage source into a divider', () => {
    const K = 2, tau = 1e-4;
    const spec: CircuitSpec = {
      elements: [
        { kind: 'voltage-source', id: 'V1', pos: 'in', neg: '0', volts: 3 },
        { kind: 'resistor', id: 'R0', a: 'in', b: '0', ohms: 100 },
        { kind: 'controlled-voltage-source', id: 'E1', pos: 'x', neg: '0', control: 'lp.out', gain: 1.5 },
        { kind: 'resistor', id: 'R1', a: 'x', b: 'y', ohms: 1e3 },
        { kind: 'resistor', id: 'R2', a: 'y', b: '0', ohms: 3e3 },
      ],
      blocks: [{ kind: 'linear-block', id: 'lp', inputs: ['in'], transferFunction: { num: [K], den: [tau, 1] } }],
      measurements: [{ name: 'half', terms: [{ signal: 'y', gain: 0.5 }], offset: 1 }],
    };
    const rows = grid(spec, 5 * tau, tau / 10, ['lp.out', 'y', 'half', 'E1.current']);
    for (const { t, v } of rows) {
      const lp = 3 * K * (1 - Math.exp(-t / tau));
      expect(Math.abs(v[0]! - lp)).toBeLessThan(1e-12 * 6);
      expect(Math.abs(v[1]! - 1.5 * lp * 0.75)).toBeLessThan(1e-12 * 10); // divider 3k / 4k
      expect(Math.abs(v[2]! - (0.5 * v[1]! + 1))).toBeLessThan(1e-12 * 10);
      // the source delivers the divider current: branch current from + to - through it is negative
      expect(Math.abs(v[3]! + (1.5 * lp) / 4e3)).toBeLessThan(1e-14 * 10);
    }
  });

  it('a controlled current source driven by a branch current (a current mirror of gain 3)', () => {
    const spec: CircuitSpec = {
      elements: [
        { kind: 'voltage-source', id: 'V1', pos: 'in', neg: '0', volts: 2 },
        { kind: 'resistor', id: 'R1', a: 'in', b: '0', ohms: 4 },
        { kind: 'controlled-current-source', id: 'F1', pos: '0', neg: 'o', control: 'R1.current', gain: 3 },
        { kind: 'resistor', id: 'R2', a: 'o', b: '0', ohms: 10 },
      ],
    };
    const rows = grid(spec, 1e-3, 1e-4, ['o']);
    for (const { v } of rows) expect(v[0]).toBeCloseTo(3 * 0.5 * 10, 12); // I = 3 * 2 V / 4 ohm into 10 ohm
  });
});

describe('sources and ramps', () => {
  it('a voltage step at t1 on an RC: v = V0 (1 - e^{-t/tau}) then toward V1 from the value at t1 (closed form)', () => {
    const tau = 1e-3, t1 = 2e-3;
    const spec: CircuitSpec = {
      elements: [
        { kind: 'voltage-source', id: 'V1', pos: 'in', neg: '0', volts: 5, steps: [{ atS: t1, value: -2 }] },
        { kind: 'resistor', id: 'R1', a: 'in', b: 'o', ohms: 1e3 },
        { kind: 'capacitor', id: 'C1', a: 'o', b: '0', farads: 1e-6 },
      ],
    };
    const rows = grid(spec, 6e-3, 1e-4, ['o']);
    const v1 = 5 * (1 - Math.exp(-t1 / tau));
    for (const { t, v } of rows) {
      const want = t <= t1 ? 5 * (1 - Math.exp(-t / tau)) : -2 + (v1 + 2) * Math.exp(-(t - t1) / tau);
      expect(Math.abs(v[0]! - want)).toBeLessThan(1e-9 * 5);
    }
  });

  it('a ramp reset by a clock is an exact sawtooth: value = slope * (t - k T)', () => {
    const T = 1e-5, slope = 1e5;
    let ramp = -1;
    const clock: Controller = {
      start(ctx) {
        ramp = ctx.block('saw');
        ctx.at(0, 1, 0);
      },
      onEvent(ctx) {
        ctx.setBlockState(ramp, 0);
        ctx.at(0, ctx.cycle + 1, 0);
      },
    };
    const spec: CircuitSpec = {
      elements: [
        { kind: 'voltage-source', id: 'V1', pos: 'a', neg: '0', volts: 1 },
        { kind: 'resistor', id: 'R1', a: 'a', b: '0', ohms: 1 },
      ],
      blocks: [{ kind: 'ramp', id: 'saw', slopePerS: slope }],
    };
    const rows = grid(spec, 20 * T, T / 8, ['saw.out'], clock, T);
    for (const { t, v } of rows) {
      // a grid point that coincides with a reset (to rounding of j * gridS) may carry either side
      const phase = t - Math.floor(t / T + 1e-9) * T;
      const atReset = Math.abs(phase) < 1e-9 * T;
      const err = atReset ? Math.min(Math.abs(v[0]!), Math.abs(v[0]! - slope * T)) : Math.abs(v[0]! - slope * phase);
      expect(err).toBeLessThan(1e-9);
    }
  });
});
