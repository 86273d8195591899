import fc from 'fast-check';
import { describe, expect, it } from 'vitest';
import { CircuitModel, simulate, type CircuitSpec, type Controller } from '../src/index.ts';

// LC tank: C dv/dt = -iL, L diL/dt = v, so v(t) = V cos(w t + phi) with w = 1/sqrt(LC)
// (circuit theory, natural response of an undamped LC circuit; Nilsson and Riedel ch. 8).
const L = 1e-6, C = 1e-6, w = 1 / Math.sqrt(L * C);
const phi0 = -0.2 * Math.PI;
const tank: CircuitSpec = {
  elements: [
    { kind: 'capacitor', id: 'C1', a: 'a', b: '0', farads: C, initialVolts: Math.cos(phi0) },
    { kind: 'inductor', id: 'L1', a: 'a', b: '0', henries: L, initialAmps: C * w * Math.sin(phi0) },
  ],
};
const thr = 0.99;
// first upward crossing of v = thr: w t + phi0 = -acos(thr)
const tStar = (-Math.acos(thr) - phi0) / w;

function watcher(times: number[]): Controller {
  return {
    start(ctx) {
      const g = ctx.guard({ signal: 'a', threshold: thr, direction: 'rising' });
      ctx.arm(g, 7);
    },
    onEvent(ctx, tag) {
      if (tag === 7) times.push(ctx.timeS);
    },
  };
}

describe('guard location', () => {
  it('catches a double crossing inside one short segment whose ends are both below the threshold', () => {
    const times: number[] = [];
    const stop = (0.4 * Math.PI) / w; // v(0) = v(stop) = cos(0.2 pi) = 0.809 < 0.99, peak 1 in between
    const r = simulate(tank, { stopS: stop, timeBaseS: stop, controller: watcher(times) });
    expect(r.status).toBe('finished');
    expect(r.counters.segments).toBeLessThanOrEqual(2);
    expect(times.length).toBe(1);
    expect(Math.abs(times[0]! - tStar)).toBeLessThan(1e-12 * stop);
  });

  it('finds the first crossing when one scheduled interval spans many oscillation periods', () => {
    const times: number[] = [];
    const period = (2 * Math.PI) / w;
    const stop = 10.2 * period;
    const r = simulate(tank, { stopS: stop, timeBaseS: period, controller: watcher(times) });
    expect(r.status).toBe('finished');
    expect(times.length).toBe(11); // one upward crossing per period, the last period included
    times.forEach((t, k) => expect(Math.abs(t - (tStar + k * period))).toBeLessThan(1e-11 * period));
  });
});

describe('drift-free scheduling', () => {
  it('clock edges land exactly on k * T after 10^6 cycles (cycle index plus offset)', () => {
    const T = 1e-6;
    let bad = 0;
    let edges = 0;
    const ctrl: Controller = {
      start(ctx) {
        ctx.at(0, 0, 0);
      },
      onEvent(ctx) {
        if (ctx.offsetS !== 0 || ctx.cycle !== edges) bad++;
        edges++;
        ctx.at(0, ctx.cycle + 1, 0);
      },
    };
    const rc: CircuitSpec = {
      elements: [
        { kind: 'voltage-source', id: 'V1', pos: 'in', neg: '0', volts: 1 },
        { kind: 'resistor', id: 'R1', a: 'in', b: 'o', ohms: 1 },
        { kind: 'capacitor', id: 'C1', a: 'o', b: '0', farads: 1e-6 },
      ],
    };
    const r = simulate(rc, { stopS: 1e6 * T, timeBaseS: T, controller: ctrl });
    expect(r.status).toBe('finished');
    expect(edges).toBe(1e6 + 1); // k = 0 .. 10^6, the last one at the stop time
    expect(bad).toBe(0);
  });

  it('timers fire in time order, one instant in scheduling order, a tag replaced or cancelled by a later request (the controller contract), with more timers pending than the queue first holds', () => {
    // Source: the controller contract (ControlContext.at/cancel: a later request for a tag
    // replaces or cancels the pending one) and the design's rule that simultaneous events go in
    // a defined order (DESIGN.md 3.6: timers at one instant in scheduling order), modelled in a
    // few lines as the reference: a pending request per tag, fired sorted by (cycle, offset,
    // scheduling order). Exact equality of the fired sequence.
    const T = 1e-6;
    const tagArb = fc.oneof(fc.integer({ min: 0, max: 40 }), fc.constantFrom(-3, 100.5, 1e6));
    const request = fc.record({
      tag: tagArb,
      cancel: fc.integer({ min: 0, max: 4 }).map((k) => k === 0), // one request in five cancels
      cycle: fc.integer({ min: 0, max: 4 }),
      offset: fc.constantFrom(0, 0.25 * T, 0.5 * T, 0.999 * T),
    });
    const rc: CircuitSpec = {
      elements: [
        { kind: 'voltage-source', id: 'V1', pos: 'in', neg: '0', volts: 1 },
        { kind: 'resistor', id: 'R1', a: 'in', b: 'o', ohms: 1 },
        { kind: 'capacitor', id: 'C1', a: 'o', b: '0', farads: 1e-6 },
      ],
    };
    const model = new CircuitModel(rc);
    fc.assert(
      fc.property(fc.array(request, { minLength: 1, maxLength: 80 }), (reqs) => {
        const pending = new Map<number, { cycle: number; offset: number; order: number }>();
        reqs.forEach((r, order) => {
          if (r.cancel) pending.delete(r.tag);
          else pending.set(r.tag, { cycle: r.cycle, offset: r.offset, order });
        });
        const expected = [...pending.entries()]
          .sort(([, a], [, b]) => a.cycle - b.cycle || a.offset - b.offset || a.order - b.order)
          .map(([tag, a]) => `${tag}@${a.cycle}+${a.offset}`);
        const fired: string[] = [];
        const ctrl: Controller = {
          start(ctx) {
            for (const r of reqs) {
              if (r.cancel) ctx.cancel(r.tag);
              else ctx.at(r.tag, r.cycle, r.offset);
            }
          },
          onEvent(ctx, tag) {
            fired.push(`${tag}@${ctx.cycle}+${ctx.offsetS}`);
          },
        };
        const r = simulate(model, { stopS: 6 * T, timeBaseS: T, controller: ctrl });
        expect(r.status).toBe('finished');
        expect(fired).toEqual(expected);
      }),
      { numRuns: 300 },
    );
  });
});

describe('runs sharing one compiled model', () => {
  it('each run keeps its own guards (same guard number, different signals and thresholds)', () => {
    const model = new CircuitModel(tank);
    const period = (2 * Math.PI) / w;
    const first = (thr: number, direction: 'rising' | 'falling'): number => {
      let at = -1;
      const r = simulate(model, {
        stopS: period, timeBaseS: period,
        controller: {
          start(ctx) {
            ctx.arm(ctx.guard({ signal: 'a', threshold: thr, direction }), 1);
          },
          onEvent(ctx) {
            if (at < 0) at = ctx.timeS;
          },
        },
      });
      expect(r.status).toBe('finished');
      return at;
    };
    // v = cos(w t + phi0): rising through 0.99 at (-acos(0.99) - phi0)/w, falling through -0.5 at (acos(-0.5) - phi0)/w (closed form)
    expect(Math.abs(first(0.99, 'rising') - tStar)).toBeLessThan(1e-12 * period);
    expect(Math.abs(first(-0.5, 'falling') - (Math.acos(-0.5) - phi0) / w)).toBeLessThan(1e-12 * period);
    expect(Math.abs(first(0.99, 'rising') - tStar)).toBeLessThan(1e-12 * period);
  });
});

describe('anchored location', () => {
  // A diode buck in DCM (invented values): the diode's zero-current crossing comes every cycle.
  const T = 2e-6;
  const buck: CircuitSpec = {
    elements: [
      { kind: 'voltage-source', id: 'VIN', pos: 'in', neg: '0', volts: 12 },
      { kind: 'switch', id: 'HS', drain: 'in', source: 'sw', gate: 'hs', onOhms: 0.01 },
      { kind: 'diode', id: 'D1', anode: '0', cathode: 'sw', forwardVolts: 0.4, onOhms: 0.02 },
      { kind: 'inductor', id: 'L1', a: 'sw', b: 'out', henries: 4.7e-6, seriesOhms: 0.02 },
      { kind: 'capacitor', id: 'C1', a: 'out', b: '0', farads: 22e-6, esrOhms: 0.005 },
      { kind: 'resistor', id: 'RLOAD', a: 'out', b: '0', ohms: 40 },
    ],
  };
  const pwm = (): Controller => {
    let hs = -1;
    return {
      start(ctx) {
        hs = ctx.gate('hs');
        ctx.at(0, 0, 0);
      },
      onEvent(ctx, tag) {
        if (tag === 0) {
          ctx.at(0, ctx.cycle + 1, 0);
          ctx.at(1, ctx.cycle, 0.42 * T);
          ctx.setGate(hs, true);
        } else ctx.setGate(hs, false);
      },
    };
  };

  it('a short step from the anchor finds the same crossings as the scan from the segment start (1e-12 of the period)', () => {
    // exp(M (a + d)) = exp(M d) exp(M a): the same exact solution, located two ways
    const run = (cache: boolean) => {
      const times: number[] = [];
      const r = simulate(buck, {
        stopS: 3000 * T, timeBaseS: T, controller: pwm(), settings: { cachePropagators: cache },
        trace: { guard: (e) => times.push(e.timeS) },
      });
      expect(r.status).toBe('finished');
      return { r, times };
    };
    const anchored = run(true);
    const scanned = run(false);
    expect(scanned.r.counters.anchoredLocations).toBe(0);
    expect(anchored.r.counters.anchoredLocations).toBeGreaterThan(0.95 * anchored.times.length);
    expect(anchored.times.length).toBe(scanned.times.length);
    expect(anchored.times.length).toBeGreaterThan(2900);
    let worst = 0;
    anchored.times.forEach((t, i) => (worst = Math.max(worst, Math.abs(t - scanned.times[i]!))));
    expect(worst).toBeLessThan(1e-12 * T);
    for (let i = 0; i < anchored.r.state.length; i++) {
      expect(Math.abs(anchored.r.state[i]! - scanned.r.state[i]!)).toBeLessThanOrEqual(1e-12 * (Math.abs(scanned.r.state[i]!) + 1e-9));
    }
  });
});

describe('screening never skips a crossing', () => {
  // Series RLC step response, underdamped (circuit theory; Nilsson and Riedel, Electric
  // Circuits, ch. 8): v_C(t) = V (1 - exp(-a t) (cos(wd t) + (a / wd) sin(wd t))), a = R / 2L,
  // wd = sqrt(1/LC - a^2). v_C rises monotonically until its first peak at t = pi / wd, so a
  // threshold below that peak has exactly one first rising crossing, found here by bisection on
  // the closed form. The engine runs it in many short clock segments, most of them far from the
  // threshold (where the norm pre-screen skips the guard), and must find the same instant.
  it('finds the first rising crossing of a random threshold to 1e-11 of the ringing period (closed form)', () => {
    let screened = 0;
    fc.assert(
      fc.property(
        fc.double({ min: 0.05, max: 0.9, noNaN: true }), // damping ratio
        fc.double({ min: 0.1, max: 0.98, noNaN: true }), // threshold as a fraction of the first peak
        fc.integer({ min: 8, max: 400 }), // clock segments per ringing period
        (zeta, frac, perPeriod) => {
          const V = 5, L = 2.2e-6, C = 10e-6;
          const w0 = 1 / Math.sqrt(L * C);
          const R = 2 * zeta * Math.sqrt(L / C);
          const a = R / (2 * L), wd = Math.sqrt(w0 * w0 - a * a);
          const vc = (t: number): number => V * (1 - Math.exp(-a * t) * (Math.cos(wd * t) + (a / wd) * Math.sin(wd * t)));
          const thr = frac * vc(Math.PI / wd);
          let lo = 0, hi = Math.PI / wd;
          for (let i = 0; i < 200 && hi - lo > 1e-18; i++) {
            const mid = 0.5 * (lo + hi);
            if (vc(mid) < thr) lo = mid;
            else hi = mid;
          }
          const period = (2 * Math.PI) / wd;
          const T = period / perPeriod;
          const rlc: CircuitSpec = {
            elements: [
              { kind: 'voltage-source', id: 'V1', pos: 'in', neg: '0', volts: V },
              { kind: 'resistor', id: 'R1', a: 'in', b: 'x', ohms: R },
              { kind: 'inductor', id: 'L1', a: 'x', b: 'y', henries: L },
              { kind: 'capacitor', id: 'C1', a: 'y', b: '0', farads: C },
            ],
          };
          const times: number[] = [];
          const clock: Controller = {
            start(ctx) {
              ctx.arm(ctx.guard({ signal: 'y', threshold: thr, direction: 'rising' }), 1);
              ctx.at(0, 1, 0);
            },
            onEvent(ctx, tag) {
              if (tag === 1) times.push(ctx.timeS);
              else ctx.at(0, ctx.cycle + 1, 0);
            },
          };
          const r = simulate(rlc, { stopS: period / 2, timeBaseS: T, controller: clock });
          expect(r.status).toBe('finished');
          expect(times.length).toBe(1);
          expect(Math.abs(times[0]! - 0.5 * (lo + hi))).toBeLessThan(1e-11 * period);
          screened += r.counters.segments;
        },
      ),
      { seed: 20261202, numRuns: 40 },
    );
    expect(screened).toBeGreaterThan(40 * 8);
  });
});
