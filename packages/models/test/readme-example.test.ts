import { describe, expect, it } from 'vitest';
// The example of packages/models/README.md, verbatim between the markers: it must keep working.
// --- example start
import { buildStage, closeLoop, measureCycles, peakCurrentMode } from '../src/index.ts';

// An invented point-of-load stage: 5 V to 1.2 V, 1 MHz, synchronous, peak current mode.
const stage = buildStage({
  kind: 'buck', rectification: 'synchronous', switchingHz: 1e6,
  input: { volts: 5 },
  inductor: { henries: 1.5e-6, seriesOhms: 0.008 },
  outputCapacitor: { farads: 47e-6, esrOhms: 0.003 },
  load: { kind: 'resistor', ohms: 0.4, steps: [{ atS: 300e-6, ohms: 0.28 }] },
  mainSwitch: { onOhms: 0.025, bodyDiode: { forwardVolts: 0.7 } },
  syncSwitch: { onOhms: 0.012, bodyDiode: { forwardVolts: 0.7 } },
});
const law = peakCurrentMode(stage, {
  senseOhms: 0.05, slopeCompensationVPerS: 6e4, blankingS: 40e-9,
  deadTime: { mainOffToSyncOnS: 15e-9, syncOffToMainOnS: 15e-9 },
  command: {
    kind: 'voltage-loop', referenceVolts: 1.2, softStartS: 100e-6,
    compensator: { kind: 'poles-zeros', integratorRadPerS: 3.9e4, zerosHz: [8.5e3], polesHz: [500e3] },
  },
});
const report = measureCycles(closeLoop(stage, law), {
  stopS: 600e-6, signals: [stage.signals.outputVoltage, stage.signals.inductorCurrent],
  inductorCurrent: stage.signals.inductorCurrent,
});
const last = report.cycles[report.cycles.length - 1]!;
console.log(last.signals.out!.average, last.signals['L1.current']!.ripple, last.mode);
// --- example end

describe('models README example', () => {
  it('regulates to the reference (integrating loop: zero static error, Erickson and Maksimovic ch. 9) with the CCM ripple of the on-time slope (ibid. ch. 2-3)', () => {
    expect(report.run.status).toBe('finished');
    // 300 us after the step the loop has settled: the cycle average is at the reference within 0.2 %
    expect(Math.abs(last.signals.out!.average - 1.2)).toBeLessThan(2.4e-3);
    // ripple: the on-time slope times the on-time, (Vg - I Ron,hs - V - I RL) D Ts / L, with D from
    // inductor volt-second balance including the conduction drops and the two dead times at -Vf
    // (Erickson and Maksimovic ch. 2-3 reasoning; the dead-time term is common practice).
    const I = 1.2 / 0.28, Ts = 1e-6;
    const vOn = 5 - I * 0.025 - 1.2 - I * 0.008; // inductor voltage while the high side conducts
    const vOff = -I * 0.012 - 1.2 - I * 0.008; // ... while the low side conducts
    const vDead = -0.7 - 1.2 - I * 0.008; // ... during each dead time (body diode)
    const fDead = (2 * 15e-9) / Ts;
    const D = (-vOff * (1 - fDead) - vDead * fDead) / (vOn - vOff); // volt-second balance
    const ripple = (vOn * D * Ts) / 1.5e-6; // 0.643 A
    // 1 %: the small-ripple duty ignores the ripple's effect on the drops
    expect(Math.abs(last.signals['L1.current']!.ripple - ripple) / ripple).toBeLessThan(0.01);
    expect(last.mode).toBe('ccm');
  });
});
