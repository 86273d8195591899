import { describe, expect, it } from 'vitest';
// The example of packages/engine/README.md, verbatim between the markers: it must keep working.
// --- example start
import { simulate, type Controller } from '../src/index.ts';

const T = 2e-6, duty = 0.42, dead = 20e-9; // 500 kHz, invented values
const halfBridgePwm: Controller = {
  start(ctx) {
    ctx.at(0, 0, 0); // first clock edge at cycle 0, offset 0
  },
  onEvent(ctx, tag) {
    const hs = ctx.gate('hs'), ls = ctx.gate('ls');
    if (tag === 0) { // clock: low side off, high side on after the dead time
      ctx.setGate(ls, false);
      ctx.at(1, ctx.cycle, dead);
      ctx.at(2, ctx.cycle, dead + duty * T);
      ctx.at(0, ctx.cycle + 1, 0); // next edge at (k + 1) T exactly
    } else if (tag === 1) ctx.setGate(hs, true);
    else if (tag === 2) { // high side off, low side on after the dead time
      ctx.setGate(hs, false);
      ctx.after(3, dead);
    } else ctx.setGate(ls, true);
  },
};

const result = simulate(
  {
    elements: [
      { kind: 'voltage-source', id: 'VIN', pos: 'in', neg: '0', volts: 12 },
      { kind: 'switch', id: 'HS', drain: 'in', source: 'sw', gate: 'hs', onOhms: 0.01, bodyDiode: { forwardVolts: 0.7 } },
      { kind: 'switch', id: 'LS', drain: 'sw', source: '0', gate: 'ls', onOhms: 0.01, bodyDiode: { forwardVolts: 0.7 } },
      { kind: 'inductor', id: 'L1', a: 'sw', b: 'out', henries: 4.7e-6, seriesOhms: 0.02 },
      { kind: 'capacitor', id: 'C1', a: 'out', b: '0', farads: 22e-6, esrOhms: 0.005 },
      { kind: 'resistor', id: 'RLOAD', a: 'out', b: '0', ohms: 2.5 },
    ],
  },
  {
    stopS: 2000 * T,
    timeBaseS: T,
    controller: halfBridgePwm,
    integrals: [{ name: 'vout', of: 'out' }], // exact integral over the run
  },
);
// --- example end

describe('engine README example', () => {
  it('settles at the averaged value (D Vin - 2 td/T Vf) / (1 + (Ron + RL)/R) (Erickson and Maksimovic ch. 3 with the dead-time drop, common practice)', () => {
    expect(result.status).toBe('finished');
    const vout = result.state[result.stateNames.indexOf('C1.charge')]!;
    const averaged = (duty * 12 - ((2 * dead) / T) * 0.7) / (1 + (0.01 + 0.02) / 2.5); // 4.9664 V
    // tolerance 0.5 %: the end-of-run sample sits somewhere on the output ripple (a few mV) and
    // the averaged expression neglects the body diode's current-dependent commutation details
    expect(Math.abs(vout - averaged) / averaged).toBeLessThan(5e-3);
  });
});
