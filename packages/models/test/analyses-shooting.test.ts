import { CircuitModel, simulate } from '@edgewise/engine';
import { describe, expect, it } from 'vitest';
import { periodicSteadyState, traceCycle, type Section, type SteadyState, type SwitchingSystem } from '../src/analyses/index.ts';
import { boostOpenLoop, buckCot, buckPcm, buckVm } from './analyses-fixtures.ts';

function converged(r: ReturnType<typeof periodicSteadyState>): SteadyState {
  if (r.status !== 'converged') throw new Error(r.message);
  return r;
}

/** Brute-force transient: the same engine run period after period from the circuit's initial state. */
function bruteForce(sys: SwitchingSystem, section: Section, periods: number): Float64Array {
  const model = sys.circuit instanceof CircuitModel ? sys.circuit : new CircuitModel(sys.circuit);
  let w = new Float64Array(model.circuit.initialState);
  for (let k = 0; k < periods; k++) w = new Float64Array(traceCycle(model, sys, section, w).run.state);
  return w;
}

function expectRel(a: ArrayLike<number>, b: ArrayLike<number>, idx: readonly number[], rtol: number): void {
  let scale = 0;
  for (const i of idx) scale = Math.max(scale, Math.abs(b[i]!));
  for (const i of idx) expect(Math.abs(a[i]! - b[i]!)).toBeLessThanOrEqual(rtol * scale);
}

describe('periodic steady state by shooting (Aprille and Trick 1972)', () => {
  it('equals the end of a long brute-force transient: voltage-mode buck with ESR and winding resistance', () => {
    const sys = buckVm({ esr: 0.05, rl: 0.1 });
    const ss = converged(periodicSteadyState(sys));
    // the slowest multiplier is ~0.94 per period: 1500 periods shrink the start error below 1e-40
    const model = new CircuitModel(sys.circuit);
    const T = sys.timeBaseS;
    const bf = simulate(model, { stopS: 1500 * T, timeBaseS: T, controller: sys.createController() });
    // iL and vC are continuous across the clock instant, so compare them at the period boundary
    const iL = ss.stateNames.indexOf('L.current'), vC = ss.stateNames.indexOf('C.charge');
    expectRel(ss.state, bf.state, [iL, vC], 1e-9);
    // analytic check of the DC output: the averaged buck with winding resistance gives
    // Vo = D Vin R / (R + RL) (Erickson and Maksimovic 2nd ed., ch. 3); the cycle average of vC
    // equals it up to ripple effects far below 1e-3 here; only a sanity bound on the state.
    expect(ss.state[vC]).toBeGreaterThan(4.5);
    expect(ss.state[vC]).toBeLessThan(4.8);
  });

  it('equals a brute-force transient in DCM (boost at light load: diode turn-off guards)', () => {
    const sys = boostOpenLoop({ r: 200 });
    const section = { kind: 'clock' } as const;
    const ss = converged(periodicSteadyState(sys));
    // dominant multiplier 0.99857 per period: 30000 periods bring the start error under 1e-15
    const bf = bruteForce(sys, section, 30000);
    expectRel(ss.state, bf, [0, 1], 1e-9);
    // DCM boost: M = (1 + sqrt(1 + 4 D^2 / K)) / 2 with K = 2 L / (R T) (Erickson and Maksimovic
    // 2nd ed., ch. 5). That is the averaged (small ripple of vC) result: the output ripple here is
    // below 0.5 %, so the cycle-start vC is within 1 % of it.
    const K = (2 * 100e-6) / (200 * 10e-6);
    const M = (1 + Math.sqrt(1 + (4 * 0.25) / K)) / 2;
    expect(Math.abs(ss.state[1]! / (5 * M) - 1)).toBeLessThan(0.01);
  });

  it('finds the period of a variable-frequency orbit (constant on-time, timer started at the valley guard)', () => {
    const sys = buckCot();
    const section = { kind: 'gate-on', gate: 'g' } as const;
    const ss = converged(periodicSteadyState(sys, { section }));
    const bf = bruteForce(sys, section, 400);
    expectRel(ss.state, bf, [0, 1], 1e-9);
    // valley current control: the inductor current starts every period at the valley command
    expect(ss.state[0]).toBeCloseTo(1, 12);
    // CCM buck volt-second balance: ton / T = <vC> / Vin exactly for ideal parts (Erickson and
    // Maksimovic 2nd ed., ch. 2). vC at the turn-on instant lies within half the peak-to-peak
    // ripple dI T / (8 C) of its average (ibid., ch. 2), which bounds the difference.
    const vo = ss.state[1]!;
    const dI = ((12 - vo) * 4e-6) / 20e-6;
    const halfRipple = (dI * ss.periodS) / (8 * 20e-6) / 2;
    expect(Math.abs((4e-6 / ss.periodS) * 12 - vo)).toBeLessThan(halfRipple);
  });
});

describe('exact Jacobian of the cycle map (saltation matrices; Leine and Nijmeijer 2004)', () => {
  const cases: [string, SwitchingSystem, Section][] = [
    ['peak current mode, RC output', buckPcm({ output: { kind: 'rc', farads: 20e-6, ohms: 2 }, ma: 5e4 }), { kind: 'clock' }],
    ['DCM boost', boostOpenLoop({ r: 200 }), { kind: 'clock' }],
    ['constant on-time (timer moves with the guard; period is an unknown)', buckCot(), { kind: 'gate-on', gate: 'g' }],
    ['voltage-mode buck with ESR', buckVm({ esr: 0.05, rl: 0.1 }), { kind: 'clock' }],
  ];
  for (const [name, sys, section] of cases) {
    it(`matches central finite differences: ${name}`, () => {
      const exact = converged(periodicSteadyState(sys, { section }));
      const fd = converged(periodicSteadyState(sys, { section, jacobian: 'finite-difference' }));
      // independent computation: central differences of the simulated cycle map, step 1e-6
      // relative; truncation O(h^2) vanishes on piecewise-linear segments, rounding ~1e-9
      const nx = exact.stateNames.length;
      for (let i = 0; i < nx * nx; i++) expect(Math.abs(exact.monodromy[i]! - fd.monodromy[i]!)).toBeLessThan(1e-6);
    });
  }
});

describe('Floquet multipliers of peak current mode (Ridley 1991)', () => {
  // Ideal buck with the output held by a voltage source: the inductor current alone is the
  // state, and the multiplier of the current loop is exactly -(m2 - ma)/(m1 + ma) with
  // m1 = (Vin - Vo)/L, m2 = Vo/L (Ridley 1991, "A new, continuous-time model for current-mode
  // control"), so the tolerance is rounding only.
  const vin = 10, L = 20e-6;
  for (const [D, maFrac] of [[0.3, 0], [0.45, 0], [0.6, 0.5], [0.7, 0.8], [0.6, 0.2]] as const) {
    it(`D = ${D}, ma = ${maFrac} m2`, () => {
      const vo = D * vin;
      const m1 = (vin - vo) / L, m2 = vo / L, ma = maFrac * m2;
      // a 5 A command keeps every case in CCM
      const ss = converged(periodicSteadyState(buckPcm({ vin, vo, l: L, ma, ic: 5 })));
      const expected = -(m2 - ma) / (m1 + ma);
      const iL = ss.stateNames.indexOf('L.current');
      expect(ss.monodromy[iL * ss.stateNames.length + iL]).toBeCloseTo(expected, 10);
      expect(ss.multipliers[0]!.re).toBeCloseTo(expected, 10);
      expect(ss.stability).toBe(Math.abs(expected) < 1 ? 'stable' : 'subharmonic');
    });
  }

  it('crosses -1 at D = 0.5 without slope compensation', () => {
    const mu = (D: number): SteadyState => converged(periodicSteadyState(buckPcm({ vin, vo: D * vin, l: L, ma: 0 })));
    // -D/(1 - D) (Ridley 1991 with ma = 0)
    expect(mu(0.49).multipliers[0]!.re).toBeCloseTo(-0.49 / 0.51, 10);
    expect(mu(0.49).stability).toBe('stable');
    expect(mu(0.5).multipliers[0]!.re).toBeCloseTo(-1, 10);
    const above = mu(0.51);
    expect(above.multipliers[0]!.re).toBeCloseTo(-0.51 / 0.49, 10);
    expect(above.stability).toBe('subharmonic');
    expect(above.message).toMatch(/subharmonic/);
  });
});

describe('shooting reports what it cannot do', () => {
  it('names a state that never returns (a ramp never reset)', () => {
    const base = buckVm();
    const sys: SwitchingSystem = {
      ...base,
      circuit: { ...base.circuit, blocks: [...(base.circuit.blocks ?? []), { kind: 'ramp', id: 'DRIFT', slopePerS: 1 }] },
    };
    const r = periodicSteadyState(sys);
    expect(r.status).toBe('not-converged');
    expect(r.message).toMatch(/multiplier equals 1/);
    expect(r.message).toMatch(/DRIFT\.state/);
  });

  it('rejects bad options naming the parameter', () => {
    expect(() => periodicSteadyState(buckVm(), { maxIterations: 0 })).toThrow(/maxIterations/);
    expect(() => periodicSteadyState(buckVm(), { tolerance: 2 })).toThrow(/tolerance/);
    expect(() => periodicSteadyState(buckVm(), { section: { kind: 'clock', cycles: 1.5 } })).toThrow(/cycles/);
  });

  it('fails with a reason when the section gate never turns on', () => {
    const sys = buckCot({ valley: -5 }); // the current never falls to the valley command
    const r = periodicSteadyState(sys, { section: { kind: 'gate-on', gate: 'g', maxPeriodS: 50e-6 }, warmupPeriods: 0 });
    expect(r.status).toBe('failed');
    expect(r.message).toMatch(/no turn-on of gate "g"/);
  });
});
