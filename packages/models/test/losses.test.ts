import { describe, expect, it } from 'vitest';
import fc from 'fast-check';
import { closeLoop, type Stage } from '../src/stage.ts';
import { buildStage } from '../src/stages/index.ts';
import { digitalControl } from '../src/control/digital.ts';
import { constantOnTime } from '../src/control/constant-on-time.ts';
import { analyzeLosses, interpolateEnergyJ, type SwitchingLossModels } from '../src/losses/index.ts';

const FS = 100e3;
const T = 1 / FS;

/**
 * A buck switch cell fed at a constant current: the switch node sinks a constant 2 A, so
 * every transition commutates exactly 2 A against exactly 12 V (ideal switch and diode).
 */
function constantCurrentCell(): Stage {
  return {
    kind: 'buck',
    rectification: 'diode',
    circuit: {
      elements: [
        { kind: 'voltage-source', id: 'VIN', pos: 'vin', neg: '0', volts: 12 },
        { kind: 'switch', id: 'Q1', drain: 'vin', source: 'sw', gate: 'Q1' },
        // the diode's 1e12 ohm leakage gives the current source a path in every topology
        { kind: 'diode', id: 'D1', anode: '0', cathode: 'sw', offOhms: 1e12 },
        { kind: 'current-source', id: 'ISINK', from: 'sw', to: '0', amps: 2 },
      ],
      measurements: [{ name: 'iin', terms: [{ signal: 'VIN.current', gain: -1 }] }],
    },
    signals: {
      inductorCurrent: 'ISINK.current', outputVoltage: 'sw', switchNode: 'sw', inputCurrent: 'iin',
      inputVoltage: 'vin', loadCurrent: 'ISINK.current', mainSwitchCurrent: 'Q1.current',
      mainSwitchVoltage: 'Q1.voltage', rectifierCurrent: 'D1.current', rectifierVoltage: 'D1.voltage',
    },
    gates: { main: 'Q1' },
    periodS: T,
    inputVolts: 12,
  };
}

const openLoop = (stage: Stage, duty: number, deadTimeS = 0) =>
  closeLoop(stage, digitalControl(stage, { measure: [], compute: () => duty, delaySamples: 0, deadTimeS }));

describe('switching energies of a constant-current cell', () => {
  const V = 12, I = 2, N = 20;
  const window = { fromS: 3 * T, toS: (3 + N) * T };

  it('linear overlap, output capacitance, reverse recovery and gate drive per cycle', () => {
    const tr = 20e-9, tf = 35e-9, coss = 300e-12, qrr = 40e-9, qg = 12e-9, vdrv = 10;
    const models: SwitchingLossModels = {
      switches: { Q1: { transitions: { kind: 'linear-overlap', riseS: tr, fallS: tf }, outputCapacitanceF: coss, gate: { chargeC: qg, driveVolts: vdrv } } },
      diodes: { D1: { recoveredChargeC: qrr } },
    };
    const rep = analyzeLosses(openLoop(constantCurrentCell(), 0.4), { ...window, switching: models });
    const q1 = rep.switching.find((s) => s.device === 'Q1')!;
    const d1 = rep.switching.find((s) => s.device === 'D1')!;
    // the window [3T, 23T) holds N turn-ons (at kT) and N turn-offs (at kT + 0.4T)
    expect(q1.turnOns).toBe(N);
    expect(q1.turnOffs).toBe(N);
    expect(d1.recoveries).toBe(N);
    // analytic: linear overlap 0.5 V I tr per turn-on, 0.5 V I tf per turn-off, so
    // 0.5 V I (tr + tf) per cycle; every quantity is exact here, only rounding remains
    // (the diode's 1e12 ohm leakage moves the commutated current by ~1e-11 relative: 9 digits)
    expect(q1.turnOnW / (0.5 * V * I * tr * FS)).toBeCloseTo(1, 9);
    expect(q1.turnOffW / (0.5 * V * I * tf * FS)).toBeCloseTo(1, 9);
    expect((q1.turnOnW + q1.turnOffW) / (0.5 * V * I * (tr + tf) * FS)).toBeCloseTo(1, 9);
    // analytic: 0.5 Coss V^2 per hard turn-on; Qg Vdrive per cycle; Qrr V per forced diode turn-off
    expect(q1.outputCapacitanceW / (0.5 * coss * V * V * FS)).toBeCloseTo(1, 9);
    expect(q1.gateDriveW / (qg * vdrv * FS)).toBeCloseTo(1, 9);
    expect(d1.reverseRecoveryW / (qrr * V * FS)).toBeCloseTo(1, 9);
    expect(rep.switchingW).toBeCloseTo(q1.totalW + d1.totalW, 15);
    // ideal devices conduct without loss, so the simulated efficiency is 1 and the estimate
    // charges the accounted switching losses to the input
    expect(rep.conductionW).toBeCloseTo(0, 9);
    expect(rep.efficiency).toBeCloseTo(rep.outputPowerW / (rep.inputPowerW + rep.switchingW), 14);
  });

  it('energy tables are read at the commutated current and blocked voltage', () => {
    // bilinear energies a + b I + c V + d I V are reproduced exactly by bilinear interpolation
    const eon = (i: number, v: number) => 1e-6 * (0.5 + 0.3 * i + 0.02 * v + 0.01 * i * v);
    const eoff = (i: number, v: number) => 1e-6 * (0.2 + 0.6 * i + 0.01 * v + 0.02 * i * v);
    const currentsA = [0, 1.5, 4], volts = [0, 10, 30];
    const grid = (f: (i: number, v: number) => number) => currentsA.map((i) => volts.map((v) => f(i, v)));
    const rep = analyzeLosses(openLoop(constantCurrentCell(), 0.3), {
      ...window,
      switching: { switches: { Q1: { transitions: { kind: 'energy-table', currentsA, volts, turnOnJ: grid(eon), turnOffJ: grid(eoff) } } } },
    });
    const q1 = rep.switching.find((s) => s.device === 'Q1')!;
    // analytic bilinear interpolation at (2 A, 12 V), once per cycle each
    expect(q1.turnOnW / (eon(I, V) * FS)).toBeCloseTo(1, 9);
    expect(q1.turnOffW / (eoff(I, V) * FS)).toBeCloseTo(1, 9);
  });
});

describe('energy-table interpolation', () => {
  const currentsA = [1, 2, 5, 10], volts = [100, 200, 400];
  const f = (i: number, v: number) => 2e-6 + 3e-7 * i + 1e-8 * v + 4e-9 * i * v;
  const table = currentsA.map((i) => volts.map((v) => f(i, v)));

  it('reproduces a bilinear function inside and (linear extrapolation) outside the grid', () => {
    // analytic: bilinear interpolation is exact for a + b I + c V + d I V on every cell
    fc.assert(
      fc.property(fc.double({ min: 0, max: 14, noNaN: true }), fc.double({ min: 50, max: 500, noNaN: true }), (i, v) => {
        const e = interpolateEnergyJ(currentsA, volts, table, i, v);
        expect(e).toBeCloseTo(Math.max(0, f(i, v)), 18);
      }),
      { seed: 20261201, numRuns: 300 },
    );
  });

  it('clamps the query to the grid with clamp extrapolation', () => {
    // analytic: clamping holds the query at the nearest grid edge
    expect(interpolateEnergyJ(currentsA, volts, table, 20, 50, 'clamp')).toBeCloseTo(f(10, 100), 18);
    expect(interpolateEnergyJ(currentsA, volts, table, 0.5, 300, 'clamp')).toBeCloseTo(f(1, 300), 18);
  });

  it('interpolates a non-bilinear table cell by cell (hand-computed value)', () => {
    // analytic: on the cell [0,1] x [0,1] with corners 0, 1, 2, 4: (1-s)(1-t)0 + (1-s)t 1 + s(1-t) 2 + s t 4
    const e = interpolateEnergyJ([0, 1], [0, 1], [[0, 1], [2, 4]], 0.25, 0.5);
    expect(e).toBeCloseTo(0.75 * 0.5 * 1 + 0.25 * 0.5 * 2 + 0.25 * 0.5 * 4, 15);
  });

  it('rejects bad tables naming the entry', () => {
    const bad = () =>
      analyzeLosses(openLoop(constantCurrentCell(), 0.3), {
        fromS: 0, toS: T,
        switching: { switches: { Q1: { transitions: { kind: 'energy-table', currentsA: [0, 2, 1], volts: [0, 10], turnOnJ: [], turnOffJ: [] } } } },
      });
    expect(bad).toThrow(/switches\.Q1\.transitions\.currentsA\[2\]: must be greater than the point before it/);
    expect(() => analyzeLosses(openLoop(constantCurrentCell(), 0.3), { fromS: 0, toS: T, switching: { switches: { Q9: {} } } })).toThrow(/no switch "Q9"/);
    expect(() => analyzeLosses(openLoop(constantCurrentCell(), 0.3), { fromS: 2 * T, toS: T })).toThrow(/toS must be a time > fromS/);
  });
});

describe('dead-time body-diode conduction', () => {
  it('matches Vf I t_dead 2 fs for a synchronous buck', () => {
    const vf = 0.7, td = 50e-9, fs = 200e3, R = 1;
    const stage = buildStage({
      kind: 'buck', rectification: 'synchronous', switchingHz: fs, input: { volts: 12 },
      inductor: { henries: 10e-6 }, outputCapacitor: { farads: 100e-6 }, load: { kind: 'resistor', ohms: R },
      mainSwitch: { bodyDiode: { forwardVolts: vf } }, syncSwitch: { bodyDiode: { forwardVolts: vf } },
      initial: { outputVolts: 5.3, inductorAmps: 5.3 },
    });
    const rep = analyzeLosses(openLoop(stage, 0.45, td), { fromS: 1.5e-3, toS: 2e-3 });
    const body = rep.conduction.find((c) => c.element === 'Q2' && c.part === 'body-diode')!;
    const I = Math.sqrt(rep.outputPowerW / R); // load current (output ripple is ~1e-4 relative)
    // common practice: P = Vf I t_dead 2 fs. The body diode carries the peak current in one dead
    // time and the valley current in the other; they average to I for a triangular ripple
    // (here ripple 1.5 A p-p on 5.3 A), and the current falls by (Vo + Vf) td / L = 0.03 A within
    // a dead time, 0.6 % of I: a 1 % tolerance covers both.
    expect(body.watts / (vf * I * td * 2 * fs)).toBeCloseTo(1, 1);
    expect(Math.abs(body.watts / (vf * I * td * 2 * fs) - 1)).toBeLessThan(0.01);
    // the main switch's body diode never conducts in CCM
    expect(rep.conduction.find((c) => c.element === 'Q1' && c.part === 'body-diode')!.watts).toBe(0);
  });
});

describe('energy balance', () => {
  it('input = output + conduction losses + stored-energy change, to 1e-6 (lossy synchronous buck, constant on-time, DCM)', () => {
    const stage = buildStage({
      kind: 'buck', rectification: 'synchronous', switchingHz: 500e3,
      input: { volts: 12, sourceOhms: 0.05, filter: { henries: 1e-6, seriesOhms: 0.01, farads: 10e-6, esrOhms: 0.005 } },
      inductor: { henries: 4.7e-6, seriesOhms: 0.02 }, outputCapacitor: { farads: 47e-6, esrOhms: 0.01 },
      load: { kind: 'resistor', ohms: 8 }, mainSwitch: { onOhms: 0.03 }, syncSwitch: { onOhms: 0.015, bodyDiode: { forwardVolts: 0.8, onOhms: 0.02 } },
      initial: { outputVolts: 3.3 },
    });
    const law = constantOnTime(stage, { referenceVolts: 3.3, onTime: { kind: 'fixed', seconds: 0.6e-6 }, minOffTimeS: 0.15e-6, deadTimeS: 20e-9, diodeEmulation: true });
    const rep = analyzeLosses(closeLoop(stage, law), { fromS: 0.2e-3, toS: 0.5e-3 });
    // energy conservation: every term is an exact integral of the piecewise-linear solution
    expect(Math.abs(rep.balanceResidualW) / rep.inputPowerW).toBeLessThan(1e-6);
    const parts = new Set(rep.conduction.map((c) => `${c.element}:${c.part}`));
    for (const p of ['Q1:channel', 'Q2:channel', 'Q2:body-diode', 'L1:winding', 'C1:esr', 'LF1:winding', 'CF1:esr']) expect(parts.has(p)).toBe(true);
    expect(rep.conductionW).toBeGreaterThan(0);
    expect(rep.conductionEfficiency).toBeCloseTo(rep.outputPowerW / rep.inputPowerW, 14);
  });
});
