import { CircuitModel, simulate } from '@edgewise/engine';
import { describe, expect, it } from 'vitest';
import { buildStage, closeLoop, periodicSteadyState, voltageMode } from '../src/index.ts';

// A closed voltage loop carries its reference in the state (value and slope, for soft start).
// Without soft start both are constant: their multiplier is 1 by construction, so shooting must
// leave them out of the Newton solve rather than stop on a singular Jacobian.
describe('shooting with conserved states', () => {
  const stage = buildStage({
    kind: 'buck', rectification: 'synchronous', switchingHz: 500e3,
    input: { volts: 12 }, inductor: { henries: 10e-6 }, outputCapacitor: { farads: 100e-6 },
    load: { kind: 'resistor', ohms: 1 }, initial: { outputVolts: 3.3, inductorAmps: 3.3 },
  });
  const closed = closeLoop(stage, voltageMode(stage, {
    referenceVolts: 3.3,
    compensator: { kind: 'poles-zeros', integratorRadPerS: 200, zerosHz: [], polesHz: [] },
    initialControlVolts: 0.275,
  }));

  it('converges on a voltage-mode loop, names the conserved reference states, and its orbit regulates to the reference', () => {
    const ss = periodicSteadyState(closed);
    expect(ss.status, ss.message).toBe('converged');
    if (ss.status !== 'converged') return;
    expect([...ss.conservedStates].sort()).toEqual(['VREF.state0', 'VREF.state1']);
    expect(ss.stability).toBe('stable');
    // an integrating compensator has zero mean error at a periodic steady state
    // (Erickson and Maksimovic, 2nd ed., ch. 9): the exact average over the orbit's period
    const r = simulate(new CircuitModel(closed.circuit), {
      stopS: ss.periodS, timeBaseS: closed.timeBaseS, controller: closed.createController(),
      initialState: ss.state, integrals: [{ name: 'v', of: 'out' }],
    });
    expect(Math.abs(r.integrals.v! / ss.periodS - 3.3)).toBeLessThan(1e-9 * 3.3);
    // and it is a fixed point of the cycle map
    for (let i = 0; i < r.stateNames.length; i++) {
      expect(Math.abs(r.state[i]! - ss.state[i]!)).toBeLessThan(1e-9 * (1 + Math.abs(ss.state[i]!)));
    }
  });
});
