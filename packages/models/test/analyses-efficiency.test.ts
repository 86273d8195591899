import { describe, expect, it } from 'vitest';
import { efficiencySweep, periodicSteadyState, steadyStateEfficiency, type SteadyState } from '../src/analyses/index.ts';
import { boostOpenLoop, buckVm } from './analyses-fixtures.ts';

function steady(sys: Parameters<typeof periodicSteadyState>[0]): SteadyState {
  const r = periodicSteadyState(sys);
  if (r.status !== 'converged') throw new Error(r.message);
  return r;
}

describe('efficiency and loss breakdown at steady state', () => {
  it('boost with winding resistance: eta = 1/(1 + RL/((1-D)^2 R)) (Erickson and Maksimovic 2nd ed., ch. 3)', () => {
    const D = 0.5, R = 10, RL = 0.1;
    // 1 mH keeps the current ripple at 1.3 % of its average: the RMS correction (dI/I)^2/12 =
    // 1.4e-5 of the winding loss (4 % of the input) moves eta by < 1e-6; the output ripple
    // (0.25 %) enters the averages only at second order. Tolerance 1e-5.
    const sys = boostOpenLoop({ duty: D, r: R, rl: RL, l: 1e-3 });
    const ss = steady(sys);
    const rep = steadyStateEfficiency(sys, ss, { inputs: ['VIN'], loads: ['R'] });
    expect(Math.abs(rep.efficiency - 1 / (1 + RL / ((1 - D) ** 2 * R)))).toBeLessThan(1e-5);
    // energy balance: input = output + losses (exact integrals; residual of the orbit only)
    expect(Math.abs(rep.balanceError)).toBeLessThan(1e-6);
    expect(Object.keys(rep.lossesW).sort()).toEqual(['D', 'L', 'S']);
    expect(rep.lossesW.D).toBeCloseTo(0, 12); // ideal diode
    expect(rep.lossesW.S).toBeCloseTo(0, 12); // ideal switch
  });

  it('switching losses passed in are accounted in the input power, not fed back', () => {
    const sys = buckVm({ rl: 0.05, esr: 0.02, vf: 0.5 });
    const ss = steady(sys);
    const base = steadyStateEfficiency(sys, ss, { inputs: ['VIN'], loads: ['R'] });
    const withSw = steadyStateEfficiency(sys, ss, { inputs: ['VIN'], loads: ['R'], extraLossesW: { switching: 0.1 } });
    expect(withSw.outputW).toBe(base.outputW);
    expect(withSw.efficiency).toBeCloseTo(base.outputW / (base.inputW + 0.1), 14);
    expect(Math.abs(base.balanceError)).toBeLessThan(1e-6);
    // diode conduction loss: Vf times its average current (analytic for a PWL diode without Rd)
    expect(base.lossesW.D).toBeGreaterThan(0);
    expect(() => steadyStateEfficiency(sys, ss, { inputs: ['R'], loads: ['R'] })).toThrow(/inputs: "R" is not an independent source/);
  });

  it('sweeps efficiency against load in one call', () => {
    const pts = efficiencySweep((r) => boostOpenLoop({ duty: 0.5, r, rl: 0.1, l: 1e-3 }), [5, 10, 20], { inputs: ['VIN'], loads: ['R'] });
    // eta rises with R at fixed RL (ibid., ch. 3)
    const eta = pts.map((p) => p.report!.efficiency);
    expect(eta[0]).toBeLessThan(eta[1]!);
    expect(eta[1]).toBeLessThan(eta[2]!);
    for (const [i, r] of [5, 10, 20].entries()) expect(Math.abs(eta[i]! - 1 / (1 + 0.1 / (0.25 * r)))).toBeLessThan(1e-5);
  });
});
