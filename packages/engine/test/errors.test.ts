import { describe, expect, it } from 'vitest';
import { CircuitError, compileCircuit, simulate, type CircuitSpec, type Controller } from '../src/index.ts';
import { buck, pwm } from './fixtures.ts';

const T = 2e-6;

describe('invalid circuits are rejected with every issue named', () => {
  it('duplicate ids, unknown kinds, non-positive L and C, floating node', () => {
    const spec = {
      elements: [
        { kind: 'voltage-source', id: 'V1', pos: 'in', neg: '0', volts: 5 },
        { kind: 'resistor', id: 'R1', a: 'in', b: 'x', ohms: 10 },
        { kind: 'resistor', id: 'R1', a: 'x', b: '0', ohms: 10 },
        { kind: 'inductor', id: 'L1', a: 'x', b: '0', henries: 0 },
        { kind: 'capacitor', id: 'C1', a: 'x', b: '0', farads: -1e-6 },
        { kind: 'resistor', id: 'R9', a: 'island1', b: 'island2', ohms: 1 },
        { kind: 'transistor', id: 'Q9', a: 'x', b: '0' },
      ],
    } as unknown as CircuitSpec;
    let err: unknown;
    try {
      compileCircuit(spec);
    } catch (e) {
      err = e;
    }
    expect(err).toBeInstanceOf(CircuitError);
    const issues = (err as CircuitError).issues.map((i) => `${i.element}: ${i.code}`);
    expect(issues).toEqual(expect.arrayContaining(['R1: duplicate-id', 'L1: value', 'C1: value', 'Q9: kind']));
    expect((err as CircuitError).message).toContain('henries must be a finite number > 0');
  });

  it('a node with no chain of elements to ground', () => {
    const spec: CircuitSpec = {
      elements: [
        { kind: 'voltage-source', id: 'V1', pos: 'in', neg: '0', volts: 5 },
        { kind: 'resistor', id: 'R1', a: 'in', b: '0', ohms: 10 },
        { kind: 'resistor', id: 'R2', a: 'f1', b: 'f2', ohms: 10 },
      ],
    };
    expect(() => compileCircuit(spec)).toThrowError(/node "f1" has no chain of elements to ground "0" \(it touches R2\)/);
  });

  it('a source shorted by zero-resistance sources or capacitors, and a dangling (misspelt) node', () => {
    const spec: CircuitSpec = {
      elements: [
        { kind: 'voltage-source', id: 'V1', pos: 'a', neg: '0', volts: 5 },
        { kind: 'voltage-source', id: 'V2', pos: 'a', neg: '0', volts: 3 },
        { kind: 'resistor', id: 'R1', a: 'a', b: 'outt', ohms: 10 },
      ],
    };
    let err: unknown;
    try {
      compileCircuit(spec);
    } catch (e) {
      err = e;
    }
    expect(err).toBeInstanceOf(CircuitError);
    expect((err as CircuitError).issues.map((i) => `${i.element}: ${i.code}`)).toEqual(['outt: dangling-node', 'V2: voltage-loop']);
    expect((err as CircuitError).message).toContain('node "outt" is connected only to R1: a misspelt node name?');
  });
});

describe('ill-posed topologies stop the run with a named error', () => {
  it('shoot-through: both switches of an ideal half bridge on', () => {
    const both: Controller = {
      start(ctx) {
        ctx.setGate(ctx.gate('hs'), true);
        ctx.after(1, 1e-6);
      },
      onEvent(ctx) {
        ctx.setGate(ctx.gate('ls'), true);
      },
    };
    const r = simulate(buck({ ron: 0 }), { stopS: 1e-5, controller: both });
    expect(r.status).toBe('failed');
    expect(r.error?.code).toBe('shoot-through');
    expect(r.error?.elements).toEqual(expect.arrayContaining(['HS', 'LS', 'VIN']));
    expect(r.message).toMatch(/^shoot-through: /);
    expect(r.timeS).toBeCloseTo(1e-6, 15);
  });

  it('no freewheeling path: dead time without body diodes names the inductor, its current, the time and the switch', () => {
    const r = simulate(buck(), { stopS: 10 * T, timeBaseS: T, controller: pwm({ periodS: T, duty: 0.42, main: 'hs', sync: 'ls', deadS: 20e-9 }) });
    expect(r.status).toBe('failed');
    expect(r.error?.code).toBe('no-freewheeling-path');
    expect(r.error?.elements).toEqual(['L1', 'HS']);
    expect(r.error?.timeS).toBeCloseTo(0.42 * T + 20e-9, 18);
    expect(r.message).toMatch(/^no freewheeling path: inductor L1 carries [0-9.]+ A at t = [0-9.e-]+ s and opening HS leaves it no path/);
  });

  it('chattering: a guard that fires again at the same instant', () => {
    const spec: CircuitSpec = {
      elements: [
        { kind: 'voltage-source', id: 'V1', pos: 'a', neg: '0', volts: 1 },
        { kind: 'resistor', id: 'R1', a: 'a', b: '0', ohms: 1 },
      ],
      blocks: [{ kind: 'ramp', id: 'ramp', slopePerS: 1, initial: -1e-3 }],
    };
    let rampH = -1;
    const ctrl: Controller = {
      start(ctx) {
        rampH = ctx.block('ramp');
        ctx.arm(ctx.guard({ signal: 'ramp.out', direction: 'rising' }), 1);
      },
      onEvent(ctx) {
        // puts the ramp back just below the threshold: it crosses again at once
        ctx.setBlockState(rampH, -1e-21); // 1e-21 s later: below the resolution of the time offset
      },
    };
    const r = simulate(spec, { stopS: 1, controller: ctrl, settings: { maxEventsPerInstant: 50 } });
    expect(r.status).toBe('failed');
    expect(r.error?.code).toBe('chattering');
    expect(r.message).toMatch(/^chattering: more than 50 events at t = 0\.000999999999999\d* s without time advancing \(guards: controller guard 0\)$/);
    expect(r.timeS).toBeCloseTo(1e-3, 12);
  });

  it('non-finite state: an unstable block overflows and the run says where', () => {
    const spec: CircuitSpec = {
      elements: [
        { kind: 'voltage-source', id: 'V1', pos: 'a', neg: '0', volts: 1 },
        { kind: 'resistor', id: 'R1', a: 'a', b: '0', ohms: 1 },
      ],
      blocks: [{ kind: 'linear-block', id: 'boom', inputs: ['a'], transferFunction: { num: [1], den: [1, -1e6] } }],
    };
    const r = simulate(spec, { stopS: 1, timeBaseS: 1e-3 });
    expect(r.status).toBe('failed');
    expect(r.error?.code).toBe('non-finite');
    expect(r.error?.elements).toEqual(['boom.state0']);
    expect(Number.isFinite(r.timeS)).toBe(true);
  });

  it('bad run options are errors naming the option', () => {
    expect(() => simulate(buck(), { stopS: Number.NaN })).toThrowError(/stopS must be a finite time/);
    expect(() => simulate(buck(), { stopS: 1, record: ['nope'] })).toThrowError(/record: unknown signal "nope"; known signals: in, sw, out/);
  });
});

describe('current sources and diodes', () => {
  const circuit = (forward: boolean): CircuitSpec => ({
    elements: [
      { kind: 'current-source', id: 'I1', from: '0', to: 'a', amps: 1 },
      { kind: 'diode', id: 'D1', anode: forward ? 'a' : 'b', cathode: forward ? 'b' : 'a', forwardVolts: 0.5 },
      { kind: 'resistor', id: 'R1', a: 'b', b: '0', ohms: 10 },
    ],
  });
  it('a current source whose only path is an off diode turns the diode on: v = Vf + I R (Ohm\'s law)', () => {
    const r = simulate(circuit(true), { stopS: 1e-3, integrals: [{ name: 'v', of: 'a' }] });
    expect(r.status).toBe('finished');
    expect(r.topology).toBe('D1=on');
    expect(r.integrals.v! / 1e-3).toBeCloseTo(10.5, 12);
  });
  it('with the diode reversed the source has no path: a named error, not a crash', () => {
    const r = simulate(circuit(false), { stopS: 1e-3 });
    expect(r.status).toBe('failed');
    expect(r.error?.code).toBe('floating-current-source');
    expect(r.message).toBe('current source I1 has no path in topology [D1=off] at t = 0 s (no diode can take its current)');
  });
});

describe('controller mistakes are named errors', () => {
  const rc: CircuitSpec = {
    elements: [
      { kind: 'voltage-source', id: 'V1', pos: 'a', neg: '0', volts: 1 },
      { kind: 'resistor', id: 'R1', a: 'a', b: '0', ohms: 1 },
    ],
  };
  const run = (f: (ctx: Parameters<Controller['onEvent']>[0]) => void) =>
    simulate(rc, { stopS: 1e-3, timeBaseS: 1e-4, controller: { start: (ctx) => ctx.at(0, 2, 0), onEvent: (ctx) => f(ctx) } });
  it('a timer in the past', () => {
    const r = run((ctx) => ctx.at(1, 1, 0));
    expect(r.status).toBe('failed');
    expect(r.message).toBe('timer 1: scheduled in the past (cycle 1 + 0 s is before t = 0.0002 s)');
  });
  it('a NaN delay', () => {
    const r = run((ctx) => ctx.after(1, Number.NaN));
    expect(r.status).toBe('failed');
    expect(r.message).toBe('timer 1: delay must be a finite time >= 0 s, got NaN');
  });
  it('a NaN block state', () => {
    const r = simulate({ ...rc, blocks: [{ kind: 'ramp', id: 'r', slopePerS: 1 }] }, {
      stopS: 1e-3, controller: { start: (ctx) => ctx.after(0, 1e-4), onEvent: (ctx) => ctx.setBlockState(ctx.block('r'), Number.NaN) },
    });
    expect(r.status).toBe('failed');
    expect(r.message).toBe('block state value must be finite, got NaN');
  });
});
