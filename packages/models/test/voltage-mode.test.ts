import type { LinearBlockSpec } from '@edgewise/engine';
import { describe, expect, it } from 'vitest';
import { buildStage, isHurwitz, ParameterError, voltageMode, type CompensatorParams, type PwmController, type StageParams, type VoltageModeParams } from '../src/index.ts';
import { runStage } from './support/run.ts';

const FS = 100e3;
const VG = 12;

function near(a: number, b: number, rtol: number, atol = 0): void {
  expect(Math.abs(a - b), `${a} vs ${b}`).toBeLessThanOrEqual(rtol * Math.abs(b) + atol);
}

// --- complex arithmetic for impedances --------------------------------------------------------
type C = readonly [number, number];
const add = (a: C, b: C): C => [a[0] + b[0], a[1] + b[1]];
const mul = (a: C, b: C): C => [a[0] * b[0] - a[1] * b[1], a[0] * b[1] + a[1] * b[0]];
const div = (a: C, b: C): C => {
  const d = b[0] * b[0] + b[1] * b[1];
  return [(a[0] * b[0] + a[1] * b[1]) / d, (a[1] * b[0] - a[0] * b[1]) / d];
};
const par = (a: C, b: C): C => div(mul(a, b), add(a, b));
const abs = (a: C): number => Math.hypot(a[0], a[1]);
const res = (r: number): C => [r, 0];
const cap = (c: number, w: number): C => [0, -1 / (w * c)];

/** Frequency response C (jwI - A)^-1 B + D of a single-input linear block (complex Gaussian elimination). */
function response(block: LinearBlockSpec, w: number): C {
  const ss = block.stateSpace!;
  const n = ss.a.length;
  const m: C[][] = ss.a.map((row, i) => row.map((v, j) => [(i === j ? 0 : 0) - v, i === j ? w : 0] as C));
  const rhs: C[] = ss.b.map((r) => [r[0]!, 0] as C);
  for (let k = 0; k < n; k++) {
    for (let i = k + 1; i < n; i++) {
      const f = div(m[i]![k]!, m[k]![k]!);
      for (let j = k; j < n; j++) m[i]![j] = add(m[i]![j]!, mul([-f[0], -f[1]], m[k]![j]!));
      rhs[i] = add(rhs[i]!, mul([-f[0], -f[1]], rhs[k]!));
    }
  }
  const x: C[] = new Array(n);
  for (let i = n - 1; i >= 0; i--) {
    let s = rhs[i]!;
    for (let j = i + 1; j < n; j++) s = add(s, mul([-1, 0], mul(m[i]![j]!, x[j]!)));
    x[i] = div(s, m[i]![i]!);
  }
  let y: C = [ss.d?.[0] ?? 0, 0];
  for (let i = 0; i < n; i++) y = add(y, mul([ss.c[i]!, 0], x[i]!));
  return y;
}

const buckParams: StageParams = {
  kind: 'buck', rectification: 'synchronous', switchingHz: FS, input: { volts: VG },
  inductor: { henries: 22e-6, seriesOhms: 0.02 }, outputCapacitor: { farads: 100e-6, esrOhms: 0.01 },
  load: { kind: 'resistor', ohms: 2.5, steps: [{ atS: 3e-3, ohms: 5 }, { atS: 4.5e-3, ohms: 2.5 }] },
};

function compBlock(stage: ReturnType<typeof buildStage>, compensator: CompensatorParams): LinearBlockSpec {
  const law = voltageMode(stage, { referenceVolts: 1, compensator });
  return law.blocks.find((b) => b.id === 'COMP') as LinearBlockSpec;
}

describe('compensators: the realized block has the transfer function of the op-amp network (circuit theory)', () => {
  const stage = buildStage(buckParams);
  const freqs = [10, 300, 2e3, 7e3, 30e3, 200e3];
  it('type II: Gc = Zf / R1 with Zf = (R2 + 1/(s C1)) || 1/(s C2)', () => {
    const p = { r1: 10e3, r2: 22e3, c1: 4.7e-9, c2: 100e-12 };
    const blk = compBlock(stage, { kind: 'type-ii', ...p });
    for (const f of freqs) {
      const w = 2 * Math.PI * f;
      const zf = par(add(res(p.r2), cap(p.c1, w)), cap(p.c2, w));
      const g = div(zf, res(p.r1));
      const h = response(blk, w);
      near(h[0], g[0], 1e-9, 1e-12 * abs(g));
      near(h[1], g[1], 1e-9, 1e-12 * abs(g));
    }
  });

  it('type III: Gc = Zf / Zi with Zi = R1 || (R3 + 1/(s C3))', () => {
    const p = { r1: 10e3, r2: 4.9e3, c1: 16.2e-9, c2: 0.65e-9, r3: 352, c3: 4.52e-9 };
    const blk = compBlock(stage, { kind: 'type-iii', ...p });
    for (const f of freqs) {
      const w = 2 * Math.PI * f;
      const zf = par(add(res(p.r2), cap(p.c1, w)), cap(p.c2, w));
      const zi = par(res(p.r1), add(res(p.r3), cap(p.c3, w)));
      const g = div(zf, zi);
      const h = response(blk, w);
      near(h[0], g[0], 1e-9, 1e-12 * abs(g));
      near(h[1], g[1], 1e-9, 1e-12 * abs(g));
    }
  });

  it('poles-zeros with a mid-band gain equals (wI/s)(1 + s/wz)/(1 + s/wp) with wI = K wz; a transfer function passes through', () => {
    const k = 3, fz = 1e3, fp = 40e3;
    const blk = compBlock(stage, { kind: 'poles-zeros', midbandGain: k, zerosHz: [fz], polesHz: [fp] });
    const wz = 2 * Math.PI * fz, wp = 2 * Math.PI * fp, wi = k * wz;
    const tf = compBlock(stage, { kind: 'transfer-function', num: [wi / wz, wi], den: [1 / wp, 1, 0] });
    for (const f of freqs) {
      const w = 2 * Math.PI * f;
      const g = div(mul([wi, 0], [1, w / wz]), mul([0, w], [1, w / wp]));
      for (const h of [response(blk, w), response(tf, w)]) {
        near(h[0], g[0], 1e-9, 1e-12 * abs(g));
        near(h[1], g[1], 1e-9, 1e-12 * abs(g));
      }
    }
    // mid-band: well between the zero and the pole the gain approaches K
    near(abs(response(blk, 2 * Math.PI * Math.sqrt(fz * fp))), k, 0.05);
  });

  it('rejects right-half-plane poles naming the parameter (Routh-Hurwitz for transfer functions)', () => {
    expect(isHurwitz([1, 3, 3, 1])).toBe(true); // (s + 1)^3
    expect(isHurwitz([1, 0, 1])).toBe(false); // s^2 + 1: on the imaginary axis
    expect(isHurwitz([1, 1, 2, 8])).toBe(false); // Routh: 1*2 - 8 < 0, two RHP roots
    const bad: [CompensatorParams, RegExp][] = [
      [{ kind: 'poles-zeros', integratorRadPerS: 1e3, zerosHz: [1e3], polesHz: [-5e3] }, /compensator\.polesHz\[0\]: a pole at s = 3\.142e\+4 rad\/s is not in the left half plane/],
      [{ kind: 'transfer-function', num: [1, 1], den: [1, 1, 2, 8, 0] }, /compensator\.den: has poles in the right half plane/],
      [{ kind: 'type-ii', r1: 10e3, r2: -1, c1: 1e-9, c2: 1e-10 }, /compensator\.r2: must be a finite number > 0/],
      [{ kind: 'poles-zeros', zerosHz: [1e3], polesHz: [1e4] }, /compensator: give exactly one of integratorRadPerS and midbandGain/],
    ];
    for (const [c, re] of bad) {
      let err: unknown;
      try {
        voltageMode(buildStage(buckParams), { referenceVolts: 1, compensator: c });
      } catch (e) {
        err = e;
      }
      expect(err).toBeInstanceOf(ParameterError);
      expect((err as Error).message).toMatch(re);
    }
  });
});

describe('voltage mode: sawtooth comparator and duty clamp', () => {
  // A compensator frozen at its initial output (integrator gain 0) makes the PWM comparator
  // open loop: duty = (vc - valley) / Vpp, and an ideal buck's average output is D Vg exactly
  // at periodic steady state (inductor volt-second balance, Erickson & Maksimovic ch. 2).
  const ideal: StageParams = {
    kind: 'buck', rectification: 'synchronous', switchingHz: FS, input: { volts: VG },
    inductor: { henries: 22e-6 }, outputCapacitor: { farads: 100e-6 }, load: { kind: 'resistor', ohms: 1 },
  };
  const frozen = (vc: number, extra: Partial<VoltageModeParams> = {}): VoltageModeParams => ({
    referenceVolts: 1, ramp: { valleyVolts: 0.5, peakToPeakVolts: 2 }, initialControlVolts: vc,
    compensator: { kind: 'poles-zeros', integratorRadPerS: 0, zerosHz: [], polesHz: [] }, ...extra,
  });
  it('duty = (vc - valley) / Vpp', () => {
    const stage = buildStage(ideal);
    const d = (1.3 - 0.5) / 2;
    // start at the averaged operating point; the LC mode (2RC = 20 cycles) decays in 400 cycles
    const run = runStage(stage, voltageMode(stage, frozen(1.3)), { cycles: 400, average: ['out'], initialState: { C1: d * VG, L1: d * VG } });
    near(run.avg.out!, d * VG, 1e-6);
  });
  it('the duty clamp holds the duty at maxDuty; a control voltage below the skip level skips every pulse', () => {
    const stage = buildStage(ideal);
    const run = runStage(stage, voltageMode(stage, frozen(3, { maxDuty: 0.7 })), { cycles: 400, average: ['out'], initialState: { C1: 0.7 * VG, L1: 0.7 * VG } });
    near(run.avg.out!, 0.7 * VG, 1e-6);
    expect((run.controller as PwmController).stats.maxDutyPulses).toBe(400);
    const skip = runStage(stage, voltageMode(stage, frozen(0.9, { skipBelowVolts: 1 })), { cycles: 20, initialState: { C1: 2 } });
    const st = (skip.controller as PwmController).stats;
    expect(st.cycles).toBe(20);
    expect(st.skippedCycles).toBe(st.cycles);
  });
});

describe('voltage mode closed loop (type III from component values)', () => {
  // Buck 12 V -> 5 V, L = 22 uH (LC resonance 3.4 kHz), C = 100 uF, Vpp = 1 V, divider 0.5.
  // Type III: integrator, zeros near 2 kHz and 3.4 kHz, poles near 50 kHz and 100 kHz, for a
  // crossover near 10 kHz (our design, checked by the response below).
  const comp: CompensatorParams = { kind: 'type-iii', r1: 10e3, r2: 4.9e3, c1: 16.2e-9, c2: 0.65e-9, r3: 352, c3: 4.52e-9 };
  it('soft-starts, regulates with no static error and recovers from load steps', () => {
    const stage = buildStage(buckParams);
    const law = voltageMode(stage, {
      referenceVolts: 2.5, feedbackGain: 0.5, softStartS: 1e-3, maxDuty: 0.9, compensator: comp,
      deadTime: { mainOffToSyncOnS: 30e-9, syncOffToMainOnS: 30e-9 },
    });
    const run = runStage(stage, law, { cycles: 600, average: ['out'], record: ['out', 'VREF.out'] });
    expect(run.result.status).toBe('finished');
    // integrator: the error averages to zero at periodic steady state, so <0.5 v> = 2.5 V up to
    // the residual transient 1.5 ms after the last step (~15 crossover periods): 1e-4 relative
    near(run.avg.out!, 5, 1e-4);
    const at = (t0: number, t1: number) => run.samples.filter((s) => s.t >= t0 && s.t <= t1);
    // the reference ramps linearly over the soft-start time, then holds exactly
    for (const s of at(0, 0.99e-3)) near(s.v[1]!, 2.5 * (s.t / 1e-3), 1e-9, 1e-12);
    for (const s of at(1.001e-3, 6e-3)) expect(s.v[1]).toBe(2.5);
    expect(Math.max(...at(0, 2.9e-3).map((s) => s.v[0]!))).toBeLessThan(5.1);
    // load steps of 1 A: deviation within 5 % (common practice), back within 1 % after 1 ms
    for (const s of at(3e-3, 6e-3)) near(s.v[0]!, 5, 5e-2);
    for (const s of [...at(4e-3, 4.5e-3), ...at(5.5e-3, 6e-3)]) near(s.v[0]!, 5, 1e-2);
    expect(Math.max(...at(3e-3, 3.5e-3).map((s) => Math.abs(s.v[0]! - 5)))).toBeGreaterThan(0.02);
  });

  it('a reference schedule steps the regulated output', () => {
    const stage = buildStage({ ...buckParams, load: { kind: 'resistor', ohms: 2.5 } });
    const law = voltageMode(stage, {
      referenceVolts: 2.5, feedbackGain: 0.5, softStartS: 0.5e-3, maxDuty: 0.9, compensator: comp,
      referenceSchedule: [{ atS: 2e-3, volts: 1.65 }],
    });
    const run = runStage(stage, law, { cycles: 400, average: ['out'] });
    near(run.avg.out!, 3.3, 1e-4);
  });
});
