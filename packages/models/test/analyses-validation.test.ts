import type { CircuitSpec } from '@edgewise/engine';
import { describe, expect, it } from 'vitest';
import { ccmAveragedModel, measureCycles, periodicSteadyState, validateAveragedModel, type SwitchingSystem, type ValidationReport } from '../src/analyses/index.ts';
import { buckVm } from './analyses-fixtures.ts';

// Large-ripple CCM buck (invented values): Vin 12 V, D 0.5, L 10 uH with 0.1 ohm winding
// resistance, C 100 uF, R 3 ohm, fs 100 kHz. The inductor ripple (3 A peak to peak) is 1.55
// times the DC current (1.94 A), yet the current stays above zero (CCM). ILOAD is a load
// current source at the output for the load step.
const vin = 12, D = 0.5, L = 10e-6, RL = 0.1, C = 100e-6, R = 3, T = 10e-6;
function largeRippleBuck(): SwitchingSystem & { circuit: CircuitSpec } {
  const base = buckVm({ vin, l: L, rl: RL, c: C, r: R, vc: D });
  return {
    ...base,
    circuit: { ...base.circuit, elements: [...base.circuit.elements, { kind: 'current-source', id: 'ILOAD', from: 'out', to: '0', amps: 0 }] },
  };
}

describe('validation report: averaged model beside the switching circuit', () => {
  const sys = largeRippleBuck();
  const avg = ccmAveragedModel(sys.circuit, { on: ['S'], off: ['D'], duty: D, periodS: T });
  const report = validateAveragedModel(sys, avg, {
    output: 'out',
    signals: ['out', 'L.current', 'VIN.current'],
    response: { source: 'VC', frequenciesHz: [100, 1e3, 3e3, 1e4] },
    step: { source: 'ILOAD', value: 1.5, cyclesBefore: 5, cyclesAfter: 150 },
  });
  const dcOf = (sig: string): ValidationReport['dc'][number] => report.dc.find((d) => d.signal === sig)!;

  it('is plain JSON (arrays of numbers, no typed arrays or functions)', () => {
    expect(JSON.parse(JSON.stringify(report))).toEqual(report);
    expect(Array.isArray(report.response!.frequencyHz)).toBe(true);
    expect(Array.isArray(report.step!.switching)).toBe(true);
    expect(report.step!.timeS).toHaveLength(155);
  });

  it('DC point of the output and the inductor current: the averaged model is exact for a CCM buck even at large ripple', () => {
    // Volt-second balance on L and charge balance on C hold exactly for the switching circuit,
    // and with an ideal switch and diode in CCM the switch node is D Vin on average whatever
    // the current: <vo> = D Vin R / (R + RL), <iL> = <vo> / R (Erickson and Maksimovic 2nd ed.,
    // ch. 3), which is also the averaged model's operating point. Only rounding separates them.
    const vo = (D * vin * R) / (R + RL);
    expect(dcOf('out').switching).toBeCloseTo(vo, 9);
    expect(dcOf('out').averaged).toBeCloseTo(vo, 12);
    expect(dcOf('L.current').switching).toBeCloseTo(vo / R, 9);
    expect(Math.abs(dcOf('out').difference)).toBeLessThan(1e-9);
  });

  it('DC input current: the averaged model is off by the ripple losses, and the size matches the energy balance and the RMS of the triangle', () => {
    const iin = dcOf('VIN.current');
    // the source current is counted into its positive terminal: delivering power makes it negative
    expect(iin.switching).toBeLessThan(0);
    // averaged model: the source delivers D <iL> (Middlebrook and Cuk 1976)
    expect(iin.averaged).toBeCloseTo(-D * dcOf('L.current').averaged, 12);
    // Independent computation (energy balance, exact for the switching circuit): the source
    // delivers <vo^2>/R + RL <iL^2>. The averaged model delivers <vo>^2/R + RL <iL>^2 with the
    // same (exact) averages, so Vin * (averaged - switching) = RL var(iL) + var(vo)/R (currents
    // counted negative when delivering), with the variances from the exact RMS of the
    // steady-state cycle. Exact up to rounding.
    const ss = periodicSteadyState(sys);
    if (ss.status !== 'converged') throw new Error(ss.message);
    const cyc = measureCycles(sys, { stopS: T, signals: ['L.current', 'out'], initialState: ss.state }).cycles[0]!;
    const variance = (m: { rms: number; average: number }): number => m.rms * m.rms - m.average * m.average;
    const extra = (RL * variance(cyc.signals['L.current']!) + variance(cyc.signals['out']!) / R) / vin;
    expect(iin.difference).toBeCloseTo(extra, 9);
    // Analytic large-ripple correction: a triangle of peak-to-peak 2 dI has variance (2 dI)^2/12,
    // with 2 dI = (Vin - Vo) D T / L (straight-line ripple, Erickson and Maksimovic ch. 2).
    // Tolerance 2 %: the straight line neglects the winding resistance's curvature
    // (T / (L/RL) = 0.1, so the slopes change by ~5 % across a subinterval, and the triangle's
    // variance by well under 1 %) and the output ripple term var(vo)/R, about 1e-3 of the total.
    const vo = dcOf('out').switching;
    const ripple = ((vin - vo - RL * (vo / R)) * D * T) / L;
    const triangle = (RL * ripple * ripple) / 12 / vin;
    expect(Math.abs(iin.difference / triangle - 1)).toBeLessThan(0.02);
    // the difference is 0.65 % of the input current: visible, not rounding
    expect(Math.abs(iin.relativeDifference!)).toBeGreaterThan(0.005);
  });

  it('ripple: exact peak to peak beside the straight-line estimate', () => {
    const rip = report.ripple.find((r) => r.signal === 'L.current')!;
    // straight-line ripple of the inductor current (Erickson and Maksimovic ch. 2) with the
    // averaged operating point: (Vin - Vo - RL IL) D T / L
    const vo = (D * vin * R) / (R + RL);
    expect(rip.averagedEstimate).toBeCloseTo(((vin - vo - (RL * vo) / R) * D * T) / L, 9);
    // exact ripple within 0.5 % of it (winding resistance curvature, see above)
    expect(Math.abs(rip.switching / rip.averagedEstimate! - 1)).toBeLessThan(0.005);
    // the small-ripple approximation neglects the capacitor voltage ripple; the exact one is
    // close to 2 dI T / (8 C) = 37.5 mV (ibid., ch. 2), within 5 % (ESR 0, DCR slope change)
    const out = report.ripple.find((r) => r.signal === 'out')!;
    expect(out.averagedEstimate).toBe(0);
    expect(Math.abs(out.switching / ((rip.switching * T) / (8 * C)) - 1)).toBeLessThan(0.05);
  });

  it('frequency response: control to output equal to the sampled-data response (natural-sampled trailing-edge PWM, no ripple on the control)', () => {
    const r = report.response!;
    // With a fixed duty command the switch node is an exact pulse train Vin q(t), and natural
    // sampling passes a modulation of vc to the pulse edges without aliasing of the control
    // (it has no ripple): the averaged buck's Vin / (1 + s L/R + s^2 LC) with RL is then the
    // switching circuit's exact small-signal response (compare Erickson and Maksimovic ch. 8,
    // table 8.2, and the 0.01 dB agreement in analyses-frequency.test.ts).
    for (let i = 0; i < r.frequencyHz.length; i++) {
      expect(Math.abs(r.error.magnitudeDb[i]!)).toBeLessThan(1e-6);
      expect(Math.abs(r.error.phaseDeg[i]!)).toBeLessThan(1e-6);
    }
    // DC gain Vin R / (R + RL) per unit duty (1 V ramp)
    expect(r.switching.magnitudeDb[0]).toBeCloseTo(20 * Math.log10((vin * R) / (R + RL)), 2);
  });

  it('load step: cycle averages of the switching run equal the averaged model (superposition on an LTI filter)', () => {
    const s = report.step!;
    // The load current source is not switched, so the step's effect is the LTI step response of
    // the L-C-R filter and its cycle averages equal the averaged model's exactly (analytic:
    // superposition). The undershoot of the 1.5 A step exceeds the 2 % band (common practice).
    for (let i = 0; i < s.error.length; i++) expect(Math.abs(s.error[i]!)).toBeLessThan(1e-9);
    expect(s.switchingFigures.undershoot).toBeCloseTo(s.averagedFigures.undershoot, 9);
    expect(s.switchingFigures.undershoot).toBeGreaterThan(s.switchingFigures.band);
    expect(s.switchingFigures.settlingTimeS).not.toBeNull();
    expect(s.switchingFigures.settlingTimeS).toBeCloseTo(s.averagedFigures.settlingTimeS!, 12);
    // final value with 1.5 A drawn: Vo' = R (D Vin - 1.5 RL) / (R + RL) (analytic DC of the
    // averaged circuit); 150 periods are 10 time constants of the filter's decay (2L/RL || 2RC)
    expect(s.averaged[s.averaged.length - 1]).toBeCloseTo((R * (D * vin - 1.5 * RL)) / (R + RL), 3);
  });

  it('rejects bad options naming them', () => {
    expect(() => validateAveragedModel(sys, avg, { output: 'nope' })).toThrow(/output: unknown signal "nope"/);
    expect(() => validateAveragedModel(sys, avg, { output: 'out', response: { source: 'R', frequenciesHz: [1e3] } })).toThrow(/response.source: "R" is not an independent source/);
    expect(() => validateAveragedModel(sys, avg, { output: 'out', step: { source: 'ILOAD', value: Number.NaN, cyclesAfter: 10 } })).toThrow(/step.value must be a finite number/);
    expect(() => validateAveragedModel(sys, avg, { output: 'out', step: { source: 'ILOAD', value: 1, cyclesAfter: 1 } })).toThrow(/step.cyclesAfter/);
    // a model that yields NaN is reported with the path of the value, never passed on
    const broken = { ...avg, dcValue: () => Number.NaN };
    expect(() => validateAveragedModel(sys, broken, { output: 'out' })).toThrow(/report\.dc\[0\]\.averaged is NaN/);
  });
});
