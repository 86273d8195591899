import fc from 'fast-check';
import { describe, expect, it } from 'vitest';
import { simulate, type Controller, type RunOptions } from '../src/index.ts';
import { buck, pwm } from './fixtures.ts';

// Property tests over randomly drawn (invented) buck stages.
const stageArb = fc.record({
  l: fc.double({ min: 1e-6, max: 22e-6, noNaN: true }),
  rl: fc.double({ min: 1e-3, max: 0.1, noNaN: true }),
  c: fc.double({ min: 4.7e-6, max: 100e-6, noNaN: true }),
  esr: fc.double({ min: 1e-3, max: 0.05, noNaN: true }),
  load: fc.double({ min: 0.5, max: 50, noNaN: true }),
  ron: fc.double({ min: 1e-3, max: 0.1, noNaN: true }),
  duty: fc.double({ min: 0.05, max: 0.95, noNaN: true }),
  sync: fc.boolean(),
  dead: fc.boolean(),
});
type Stage = typeof stageArb extends fc.Arbitrary<infer X> ? X : never;
const T = 2e-6;

function spec(s: Stage) {
  return buck({ l: s.l, rl: s.rl, c: s.c, esr: s.esr, load: s.load, ron: s.ron, sync: s.sync, body: { forwardVolts: 0.7, onOhms: 0.01 }, diode: { forwardVolts: 0.4, onOhms: 0.02 } });
}
function control(s: Stage): Controller {
  return pwm({ periodS: T, duty: s.duty, main: 'hs', ...(s.sync ? { sync: 'ls' } : {}), deadS: s.dead && s.sync ? 30e-9 : 0 });
}

describe('energy balance (conservation of energy; Tellegen\'s theorem)', () => {
  it('source energy = stored energy change + resistive and diode losses, to 1e-9 relative', () => {
    fc.assert(
      fc.property(stageArb, (s) => {
        const dev = s.sync ? ['HS', 'LS'] : ['HS', 'D1'];
        const integrals = [
          { name: 'src', of: 'VIN.voltage', times: 'VIN.current' },
          { name: 'load', of: 'RLOAD.voltage', times: 'RLOAD.current' },
          ...dev.map((d) => ({ name: d, of: `${d}.voltage`, times: `${d}.current` })),
          { name: 'iL2', of: 'L1.current', times: 'L1.current' },
          { name: 'iC2', of: 'C1.current', times: 'C1.current' },
        ];
        const r = simulate(spec(s), { stopS: 40 * T, timeBaseS: T, controller: control(s), integrals });
        expect(r.status).toBe('finished');
        const iL = r.state[r.stateNames.indexOf('L1.current')]!;
        const vC = r.state[r.stateNames.indexOf('C1.charge')]!;
        const stored = 0.5 * s.l * iL * iL + 0.5 * s.c * vC * vC;
        const I = r.integrals;
        const losses = I.load! + dev.reduce((a, d) => a + I[d]!, 0) + s.rl * I.iL2! + s.esr * I.iC2!;
        const delivered = -I.src!; // the source's branch current flows from + to - through it
        expect(Math.abs(delivered - (stored + losses))).toBeLessThanOrEqual(1e-9 * Math.abs(delivered));
      }),
      { seed: 20261201, numRuns: 25 },
    );
  });
});

describe('invariance of the exact solution', () => {
  it('caching propagators on or off gives the same run (to 1e-12 relative)', () => {
    fc.assert(
      fc.property(stageArb, (s) => {
        const opts = (cache: boolean): RunOptions => ({ stopS: 60 * T, timeBaseS: T, controller: control(s), settings: { cachePropagators: cache } });
        const a = simulate(spec(s), opts(true));
        const b = simulate(spec(s), opts(false));
        expect(a.status).toBe('finished');
        expect(b.status).toBe('finished');
        expect(b.counters.propagatorCacheHits).toBe(0);
        for (let i = 0; i < a.state.length; i++) {
          expect(Math.abs(a.state[i]! - b.state[i]!)).toBeLessThanOrEqual(1e-12 * (Math.abs(a.state[i]!) + 1e-9));
        }
      }),
      { seed: 7, numRuns: 25 },
    );
  });

  it('splitting a segment at an arbitrary interior time changes nothing beyond 1e-12', () => {
    fc.assert(
      fc.property(stageArb, fc.double({ min: 0.001, max: 0.999, noNaN: true }), fc.integer({ min: 0, max: 39 }), (s, frac, cycle) => {
        const plain = simulate(spec(s), { stopS: 40 * T, timeBaseS: T, controller: control(s) });
        const inner = control(s);
        // same controller plus a timer that does nothing at an interior time of some segment
        const split: Controller = {
          start(ctx) {
            inner.start(ctx);
            ctx.at(99, cycle, frac * T);
          },
          onEvent(ctx, tag) {
            if (tag !== 99) inner.onEvent(ctx, tag);
          },
        };
        const cut = simulate(spec(s), { stopS: 40 * T, timeBaseS: T, controller: split });
        expect(cut.counters.segments).toBeGreaterThanOrEqual(plain.counters.segments);
        for (let i = 0; i < plain.state.length; i++) {
          expect(Math.abs(plain.state[i]! - cut.state[i]!)).toBeLessThanOrEqual(1e-12 * (Math.abs(plain.state[i]!) + 1e-9));
        }
      }),
      { seed: 11, numRuns: 40 },
    );
  });
});
