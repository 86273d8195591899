/**
 * Small switching systems written directly on the engine for the analysis tests (invented demo
 * values). Each returns a SwitchingSystem: circuit, controller factory and time base.
 */
import type { CircuitSpec, Controller, ElementSpec } from '@edgewise/engine';
import type { SwitchingSystem } from '../src/analyses/index.ts';

const CLOCK = 0;
const TRIP = 1;

/**
 * Trailing-edge PWM: at each clock the gate turns on and the ramp restarts; the gate turns off
 * when the guard (a linear combination of signals) rises through its threshold.
 */
export function comparatorPwm(opts: {
  gate: string;
  ramp: string;
  terms: readonly { signal: string; gain: number }[];
  threshold: number;
  periodS: number;
  /** Longest on-time as a fraction of the period (default 0.95). */
  maxDuty?: number;
}): () => Controller {
  return () => {
    let g = -1, guard = -1, ramp = -1;
    const clock = (ctx: Parameters<Controller['onEvent']>[0]): void => {
      ctx.setGate(g, true);
      ctx.setBlockState(ramp, 0);
      ctx.arm(guard, TRIP);
      ctx.at(CLOCK, ctx.cycle + 1, 0);
      ctx.at(TRIP + 1, ctx.cycle, (opts.maxDuty ?? 0.95) * opts.periodS);
    };
    return {
      start(ctx) {
        g = ctx.gate(opts.gate);
        ramp = ctx.block(opts.ramp);
        guard = ctx.guard({ terms: opts.terms, threshold: opts.threshold, direction: 'rising' });
        clock(ctx);
      },
      onEvent(ctx, tag) {
        if (tag === CLOCK) clock(ctx);
        else {
          ctx.setGate(g, false);
          ctx.disarm(guard);
          ctx.cancel(TRIP + 1);
        }
      },
    };
  };
}

export interface BuckVmParams {
  vin?: number;
  l?: number;
  rl?: number;
  c?: number;
  esr?: number;
  r?: number;
  /** Control voltage, volts, and ramp amplitude, volts: D = vc / vm. */
  vc?: number;
  vm?: number;
  periodS?: number;
  /** Diode forward voltage (default 0: ideal). */
  vf?: number;
}

/** Buck with a diode, voltage-mode trailing-edge PWM from a control source VC against a ramp. */
export function buckVm(p: BuckVmParams = {}): SwitchingSystem & { circuit: CircuitSpec } {
  const T = p.periodS ?? 10e-6;
  const vm = p.vm ?? 1;
  const els: ElementSpec[] = [
    { kind: 'voltage-source', id: 'VIN', pos: 'in', neg: '0', volts: p.vin ?? 12 },
    { kind: 'switch', id: 'S', drain: 'in', source: 'sw', gate: 'g' },
    { kind: 'diode', id: 'D', anode: '0', cathode: 'sw', forwardVolts: p.vf ?? 0 },
    { kind: 'inductor', id: 'L', a: 'sw', b: 'out', henries: p.l ?? 50e-6, seriesOhms: p.rl ?? 0 },
    { kind: 'capacitor', id: 'C', a: 'out', b: '0', farads: p.c ?? 20e-6, esrOhms: p.esr ?? 0 },
    { kind: 'resistor', id: 'R', a: 'out', b: '0', ohms: p.r ?? 5 },
    { kind: 'voltage-source', id: 'VC', pos: 'vc', neg: '0', volts: p.vc ?? 0.4 },
    // a terminating resistor: the control node then has two terminals (the engine rejects a
    // node with one as a likely misspelling); across an ideal source it changes no state, and
    // at 1 Gohm its power (below 1e-9 W) is far below the energy-balance checks
    { kind: 'resistor', id: 'RVC', a: 'vc', b: '0', ohms: 1e9 },
  ];
  return {
    circuit: { elements: els, blocks: [{ kind: 'ramp', id: 'RAMP', slopePerS: vm / T }] },
    createController: comparatorPwm({ gate: 'g', ramp: 'RAMP', terms: [{ signal: 'RAMP.out', gain: 1 }, { signal: 'vc', gain: -1 }], threshold: 0, periodS: T }),
    timeBaseS: T,
  };
}

export interface PcmParams {
  vin?: number;
  vo?: number;
  l?: number;
  /** Peak current command, amperes. */
  ic?: number;
  /** Compensation ramp slope, amperes per second. */
  ma?: number;
  periodS?: number;
  /** Output: an ideal voltage source (default) or a capacitor with a load resistor. */
  output?: { kind: 'source' } | { kind: 'rc'; farads: number; ohms: number };
}

/** Buck with a diode under peak current mode (fixed current command, slope compensation ma). */
export function buckPcm(p: PcmParams = {}): SwitchingSystem & { circuit: CircuitSpec } {
  const T = p.periodS ?? 10e-6;
  const out = p.output ?? { kind: 'source' };
  const els: ElementSpec[] = [
    { kind: 'voltage-source', id: 'VIN', pos: 'in', neg: '0', volts: p.vin ?? 10 },
    { kind: 'switch', id: 'S', drain: 'in', source: 'sw', gate: 'g' },
    { kind: 'diode', id: 'D', anode: '0', cathode: 'sw' },
    { kind: 'inductor', id: 'L', a: 'sw', b: 'out', henries: p.l ?? 20e-6 },
    ...(out.kind === 'source'
      ? [{ kind: 'voltage-source', id: 'VO', pos: 'out', neg: '0', volts: p.vo ?? 4 } as const]
      : [
          { kind: 'capacitor', id: 'C', a: 'out', b: '0', farads: out.farads, initialVolts: p.vo ?? 4 } as const,
          { kind: 'resistor', id: 'R', a: 'out', b: '0', ohms: out.ohms } as const,
        ]),
    { kind: 'voltage-source', id: 'IC', pos: 'ic', neg: '0', volts: p.ic ?? 2 },
    { kind: 'resistor', id: 'RIC', a: 'ic', b: '0', ohms: 1e9 },
  ];
  return {
    circuit: { elements: els, blocks: [{ kind: 'ramp', id: 'SC', slopePerS: p.ma ?? 0 }] },
    createController: comparatorPwm({
      gate: 'g', ramp: 'SC', terms: [{ signal: 'L.current', gain: 1 }, { signal: 'SC.out', gain: 1 }, { signal: 'ic', gain: -1 }], threshold: 0, periodS: T, maxDuty: 0.99,
    }),
    timeBaseS: T,
  };
}

export interface BoostParams {
  vin?: number;
  l?: number;
  rl?: number;
  c?: number;
  r?: number;
  duty?: number;
  periodS?: number;
}

/** Boost with a diode, open-loop PWM at a fixed duty (a timer ends the on-time). */
export function boostOpenLoop(p: BoostParams = {}): SwitchingSystem & { circuit: CircuitSpec } {
  const T = p.periodS ?? 10e-6;
  const D = p.duty ?? 0.5;
  const els: ElementSpec[] = [
    { kind: 'voltage-source', id: 'VIN', pos: 'in', neg: '0', volts: p.vin ?? 5 },
    { kind: 'inductor', id: 'L', a: 'in', b: 'sw', henries: p.l ?? 100e-6, seriesOhms: p.rl ?? 0 },
    { kind: 'switch', id: 'S', drain: 'sw', source: '0', gate: 'g' },
    { kind: 'diode', id: 'D', anode: 'sw', cathode: 'out' },
    { kind: 'capacitor', id: 'C', a: 'out', b: '0', farads: p.c ?? 100e-6 },
    { kind: 'resistor', id: 'R', a: 'out', b: '0', ohms: p.r ?? 10 },
  ];
  return {
    circuit: { elements: els },
    createController: () => {
      let g = -1;
      const clock = (ctx: Parameters<Controller['onEvent']>[0]): void => {
        ctx.setGate(g, true);
        ctx.at(CLOCK, ctx.cycle + 1, 0);
        ctx.at(TRIP, ctx.cycle, D * T);
      };
      return {
        start(ctx) {
          g = ctx.gate('g');
          clock(ctx);
        },
        onEvent(ctx, tag) {
          if (tag === CLOCK) clock(ctx);
          else ctx.setGate(g, false);
        },
      };
    },
    timeBaseS: T,
  };
}

export interface CotParams {
  vin?: number;
  l?: number;
  c?: number;
  esr?: number;
  r?: number;
  /** On-time, seconds. */
  onS?: number;
  /** Valley current command, amperes. */
  valley?: number;
  /** Nominal period for the time base, seconds. */
  periodS?: number;
}

/**
 * Buck under constant on-time valley current control: the gate turns on when the inductor
 * current falls to the valley command and off a fixed time later (a timer started at the guard).
 */
export function buckCot(p: CotParams = {}): SwitchingSystem & { circuit: CircuitSpec } {
  const ton = p.onS ?? 4e-6;
  const els: ElementSpec[] = [
    { kind: 'voltage-source', id: 'VIN', pos: 'in', neg: '0', volts: p.vin ?? 12 },
    { kind: 'switch', id: 'S', drain: 'in', source: 'sw', gate: 'g' },
    { kind: 'diode', id: 'D', anode: '0', cathode: 'sw' },
    { kind: 'inductor', id: 'L', a: 'sw', b: 'out', henries: p.l ?? 20e-6 },
    { kind: 'capacitor', id: 'C', a: 'out', b: '0', farads: p.c ?? 20e-6, esrOhms: p.esr ?? 0.02 },
    { kind: 'resistor', id: 'R', a: 'out', b: '0', ohms: p.r ?? 2 },
  ];
  const ON_END = 1, VALLEY = 2;
  return {
    circuit: { elements: els },
    createController: () => {
      let g = -1, valley = -1;
      return {
        start(ctx) {
          g = ctx.gate('g');
          valley = ctx.guard({ signal: 'L.current', threshold: p.valley ?? 1, direction: 'falling' });
          ctx.setGate(g, true);
          ctx.after(ON_END, ton);
        },
        onEvent(ctx, tag) {
          if (tag === ON_END) {
            ctx.setGate(g, false);
            ctx.arm(valley, VALLEY);
          } else {
            ctx.disarm(valley);
            ctx.setGate(g, true);
            ctx.after(ON_END, ton);
          }
        },
      };
    },
    timeBaseS: p.periodS ?? 10e-6,
  };
}

/** Boost with a diode under voltage-mode trailing-edge PWM from a control source VC against a 1 V ramp: D = vc. */
export function boostVm(p: BoostParams & { vc?: number } = {}): SwitchingSystem & { circuit: CircuitSpec } {
  const T = p.periodS ?? 10e-6;
  const base = boostOpenLoop(p);
  return {
    circuit: {
      elements: [
        ...base.circuit.elements,
        { kind: 'voltage-source', id: 'VC', pos: 'vc', neg: '0', volts: p.vc ?? 0.5 },
        { kind: 'resistor', id: 'RVC', a: 'vc', b: '0', ohms: 1e9 },
      ],
      blocks: [{ kind: 'ramp', id: 'RAMP', slopePerS: 1 / T }],
    },
    createController: comparatorPwm({ gate: 'g', ramp: 'RAMP', terms: [{ signal: 'RAMP.out', gain: 1 }, { signal: 'vc', gain: -1 }], threshold: 0, periodS: T }),
    timeBaseS: T,
  };
}
