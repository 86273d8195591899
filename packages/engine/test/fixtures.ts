import type { CircuitSpec, Controller, ElementSpec } from '../src/index.ts';

/** Fixed-frequency PWM with break-before-make dead time on a main gate and an optional sync gate, written as a user would. */
export function pwm(opts: { periodS: number; duty: number; main: string; sync?: string; deadS?: number }): Controller {
  const { periodS: T, duty: D, deadS: td = 0 } = opts;
  let hs = -1, ls = -1;
  return {
    start(ctx) {
      hs = ctx.gate(opts.main);
      if (opts.sync !== undefined) ls = ctx.gate(opts.sync);
      ctx.at(0, 0, 0);
    },
    onEvent(ctx, tag) {
      switch (tag) {
        case 0: // clock: sync off, main on after the dead time
          ctx.at(0, ctx.cycle + 1, 0);
          if (ls >= 0) ctx.setGate(ls, false);
          if (td > 0 && ls >= 0) ctx.at(1, ctx.cycle, td);
          else ctx.setGate(hs, true);
          ctx.at(2, ctx.cycle, td + D * T);
          break;
        case 1:
          ctx.setGate(hs, true);
          break;
        case 2: // end of on-time: main off, sync on after the dead time
          ctx.setGate(hs, false);
          if (ls >= 0) {
            if (td > 0) ctx.at(3, ctx.cycle, 2 * td + D * T);
            else ctx.setGate(ls, true);
          }
          break;
        case 3:
          ctx.setGate(ls, true);
          break;
      }
    },
  };
}

export interface BuckParams {
  vin?: number;
  l?: number;
  rl?: number;
  c?: number;
  esr?: number;
  load?: number;
  ron?: number;
  sync?: boolean;
  body?: { forwardVolts: number; onOhms?: number };
  diode?: { forwardVolts: number; onOhms: number };
  inputFilter?: boolean;
}

/** A buck stage (invented demo values by default: 12 V in, 4.7 uH, 22 uF, 2.5 ohm). */
export function buck(p: BuckParams = {}): CircuitSpec {
  const vin = p.vin ?? 12;
  const els: ElementSpec[] = [];
  let hsDrain = 'in';
  if (p.inputFilter) {
    els.push(
      { kind: 'voltage-source', id: 'VIN', pos: 'src', neg: '0', volts: vin },
      { kind: 'inductor', id: 'LF', a: 'src', b: 'in', henries: 1e-6, seriesOhms: 0.01 },
      { kind: 'capacitor', id: 'CF', a: 'in', b: '0', farads: 10e-6, esrOhms: 0.003, initialVolts: vin },
    );
  } else {
    els.push({ kind: 'voltage-source', id: 'VIN', pos: hsDrain, neg: '0', volts: vin });
  }
  hsDrain = 'in';
  els.push({
    kind: 'switch', id: 'HS', drain: hsDrain, source: 'sw', gate: 'hs', onOhms: p.ron ?? 0.01,
    ...(p.body ? { bodyDiode: p.body } : {}),
  });
  if (p.sync ?? true) {
    els.push({ kind: 'switch', id: 'LS', drain: 'sw', source: '0', gate: 'ls', onOhms: p.ron ?? 0.01, ...(p.body ? { bodyDiode: p.body } : {}) });
  } else {
    const d = p.diode ?? { forwardVolts: 0.4, onOhms: 0.02 };
    els.push({ kind: 'diode', id: 'D1', anode: '0', cathode: 'sw', forwardVolts: d.forwardVolts, onOhms: d.onOhms });
  }
  els.push(
    { kind: 'inductor', id: 'L1', a: 'sw', b: 'out', henries: p.l ?? 4.7e-6, seriesOhms: p.rl ?? 0.02 },
    { kind: 'capacitor', id: 'C1', a: 'out', b: '0', farads: p.c ?? 22e-6, esrOhms: p.esr ?? 0.005 },
    { kind: 'resistor', id: 'RLOAD', a: 'out', b: '0', ohms: p.load ?? 2.5 },
  );
  return { elements: els };
}

/** Relative closeness with an absolute floor. */
export function close(a: number, b: number, rtol: number, atol = 0): boolean {
  return Math.abs(a - b) <= atol + rtol * Math.abs(b);
}
