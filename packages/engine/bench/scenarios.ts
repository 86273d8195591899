// Benchmark scenarios (invented values), as specified for the engine benchmark.
import type { CircuitSpec, Controller, ElementSpec } from '../src/index.ts';

export const PERIOD_S = 2e-6; // 500 kHz
export const DUTY = 0.42;

function stage(kind: 'S1' | 'S2' | 'S3'): CircuitSpec {
  const els: ElementSpec[] = [];
  if (kind === 'S2') {
    els.push(
      { kind: 'voltage-source', id: 'VIN', pos: 'src', neg: '0', volts: 12 },
      { kind: 'inductor', id: 'LF', a: 'src', b: 'in', henries: 1e-6, seriesOhms: 0.01 },
      { kind: 'capacitor', id: 'CF', a: 'in', b: '0', farads: 10e-6, esrOhms: 0.003, initialVolts: 0 },
    );
  } else els.push({ kind: 'voltage-source', id: 'VIN', pos: 'in', neg: '0', volts: 12 });
  els.push({ kind: 'switch', id: 'HS', drain: 'in', source: 'sw', gate: 'hs', onOhms: 0.01 });
  if (kind === 'S3') els.push({ kind: 'diode', id: 'D1', anode: '0', cathode: 'sw', forwardVolts: 0.4, onOhms: 0.02 });
  else els.push({ kind: 'switch', id: 'LS', drain: 'sw', source: '0', gate: 'ls', onOhms: 0.01 });
  els.push(
    { kind: 'inductor', id: 'L1', a: 'sw', b: 'out', henries: 4.7e-6, seriesOhms: 0.02 },
    { kind: 'capacitor', id: 'C1', a: 'out', b: '0', farads: 22e-6, esrOhms: 0.005 },
    { kind: 'resistor', id: 'RLOAD', a: 'out', b: '0', ohms: kind === 'S3' ? 40 : 2.5 },
  );
  return { elements: els };
}

export const SCENARIOS = {
  S1: { title: 'S1 open-loop synchronous buck (2 states)', circuit: stage('S1'), sync: true },
  S2: { title: 'S2 synchronous buck with input filter (4 states)', circuit: stage('S2'), sync: true },
  S3: { title: 'S3 diode buck in DCM (zero-current event every cycle)', circuit: stage('S3'), sync: false },
} as const;

/** Fixed-duty PWM, complementary sync gate, no dead time: what a user writes in a few lines. */
export function openLoop(sync: boolean): Controller {
  let hs = -1, ls = -1;
  return {
    start(ctx) {
      hs = ctx.gate('hs');
      if (sync) ls = ctx.gate('ls');
      ctx.at(0, 0, 0);
    },
    onEvent(ctx, tag) {
      if (tag === 0) {
        ctx.at(0, ctx.cycle + 1, 0);
        ctx.at(1, ctx.cycle, DUTY * PERIOD_S);
        if (ls >= 0) ctx.setGate(ls, false);
        ctx.setGate(hs, true);
      } else {
        ctx.setGate(hs, false);
        if (ls >= 0) ctx.setGate(ls, true);
      }
    },
  };
}
