import { describe, expect, it } from 'vitest';
import { CircuitModel, simulate, type RunResult } from '@edgewise/engine';
import { closeLoop, type ClosedStage, type Stage } from '../src/stage.ts';
import { buildStage } from '../src/stages/index.ts';
import { digitalControl, type DigitalSample } from '../src/control/digital.ts';

const FS = 100e3;
const T = 1 / FS;

function buck(seriesOhms = 0): Stage {
  return buildStage({
    kind: 'buck', rectification: 'diode', switchingHz: FS, input: { volts: 12 },
    inductor: { henries: 10e-6, seriesOhms }, outputCapacitor: { farads: 100e-6, esrOhms: 0.01 },
    load: { kind: 'resistor', ohms: 2 }, initial: { outputVolts: 1.234 },
  });
}

/** Runs and returns the on-time of the main switch in each switching period (0 when it stays off), seconds. */
function onTimes(closed: ClosedStage, periods: number): { onS: number[]; run: RunResult } {
  const model = new CircuitModel(closed.circuit);
  const bit = 1 << model.circuit.devices.findIndex((d) => d.id === 'Q1');
  const onS = new Array<number>(periods).fill(0);
  let since = -1;
  const run = simulate(model, {
    stopS: periods * T, timeBaseS: closed.timeBaseS, controller: closed.createController(),
    trace: {
      switched(t, b, a) {
        if (!(b & bit) && a & bit) since = t;
        if (b & bit && !(a & bit)) {
          onS[Math.floor(since / T + 1e-9)]! += t - since;
          since = -1;
        }
      },
    },
  });
  return { onS, run };
}

/** A duty sequence with no feedback, so the lag is visible sample by sample. */
const pattern = (n: number): number => 0.2 + 0.05 * (n % 7);

describe('sampled digital control', () => {
  for (const delay of [0, 1, 2]) {
    it(`applies the duty of sample n in period n + ${delay} (compute delay ${delay})`, () => {
      const st = buck();
      const seen: { index: number; timeS: number; vo: number }[] = [];
      const law = digitalControl(st, {
        measure: { vo: st.signals.outputVoltage },
        compute: (s) => {
          seen.push({ index: s.index, timeS: s.timeS, vo: s.values.vo });
          return pattern(s.index);
        },
        delaySamples: delay,
        initialDuty: 0.1,
      });
      const N = 30;
      const { onS, run } = onTimes(closeLoop(st, law), N);
      expect(run.status).toBe('finished');
      // a fact of the implementation: sample k at k T with index k; the first one reads the
      // initial output voltage
      expect(seen.slice(0, N).map((s) => s.index)).toEqual([...Array(N).keys()]);
      seen.slice(0, N).forEach((s, k) => expect(s.timeS).toBeCloseTo(k * T, 18));
      // (analytic: at t = 0 the ESR and the load divide the capacitor voltage)
      expect(seen[0]!.vo).toBeCloseTo((1.234 * 2) / (2 + 0.01), 14);
      // a fact of the implementation: the duty computed at sample k - delay drives period k;
      // before that the initial duty does (turn-off instants are scheduled drift free)
      for (let k = 0; k < N - 1; k++) {
        const expected = k >= delay ? pattern(k - delay) : 0.1;
        expect(onS[k]! / T).toBeCloseTo(expected, 10);
      }
    });
  }

  it('regulates the buck to the reference with an integral controller', () => {
    const st = buck(0.05);
    const ref = 5, ki = 2e-3;
    const sampled: number[] = [];
    const law = digitalControl(st, {
      measure: [st.signals.outputVoltage],
      compute: (() => {
        let d = 0;
        return (s: DigitalSample<readonly string[]>) => {
          if (s.index === 0) d = 0;
          sampled[s.index] = s.values[0]!;
          d = Math.min(0.95, Math.max(0, d + ki * (ref - s.values[0]!)));
          return d;
        };
      })(),
      maxDuty: 0.95,
    });
    const closed = closeLoop(st, law);
    const stopS = 6e-3, fromS = 5e-3;
    const run = (until: number) =>
      simulate(closed.circuit, { stopS: until, timeBaseS: closed.timeBaseS, controller: closed.createController(), integrals: [{ name: 'v', of: 'out' }] });
    const v0 = run(fromS).integrals.v!;
    const mean = (run(stopS).integrals.v! - v0) / (stopS - fromS);
    // common practice: integral action leaves no steady-state error in the sampled output; the
    // loop settles with a time constant ~ T / (ki Vin) = 0.4 ms, so after 5 ms the samples sit
    // at the reference to well under 0.1 mV
    const last = sampled.slice(-50);
    expect(last.length).toBe(50);
    for (const v of last) expect(Math.abs(v - ref)).toBeLessThan(1e-4);
    // the mean output differs from the value sampled at the carrier start by part of the output
    // ripple (ESR x 2.9 A + 2.9 A T / (8 C) ~ 65 mV p-p, 1.3 % of 5 V)
    expect(Math.abs(mean / ref - 1)).toBeLessThan(0.013);
  });

  it('clamps the duty to [minDuty, maxDuty]', () => {
    const st = buck();
    const { onS } = onTimes(closeLoop(st, digitalControl(st, { measure: [], compute: (s) => (s.index % 2 ? 0.99 : 0.01), delaySamples: 0, minDuty: 0.05, maxDuty: 0.8 })), 6);
    // a fact of the implementation
    expect(onS.map((x) => x / T).map((x) => +x.toFixed(12))).toEqual([0.05, 0.8, 0.05, 0.8, 0.05, 0.8]);
  });

  it('samples every m-th period at the given offset', () => {
    const st = buck();
    const times: number[] = [];
    const law = digitalControl(st, { measure: [], compute: (s) => (times.push(s.timeS), 0.3), samplePeriodS: 3 * T, sampleOffsetS: 0.25 * T });
    onTimes(closeLoop(st, law), 10);
    // a fact of the implementation: samples at 3kT + T/4
    expect(times.length).toBe(4);
    times.forEach((t, k) => expect(t).toBeCloseTo(3 * k * T + 0.25 * T, 18));
  });

  it('ends the on-time at the current limit for the rest of the period', () => {
    const st = buck();
    const law = digitalControl(st, { measure: [], compute: () => 0.9, delaySamples: 0, currentLimit: { peakAmps: 3 } });
    const closed = closeLoop(st, law);
    let imax = -Infinity;
    const r = simulate(closed.circuit, {
      stopS: 40 * T, timeBaseS: closed.timeBaseS, controller: closed.createController(), record: [st.signals.inductorCurrent],
      sink: { sample: (_t, v) => { imax = Math.max(imax, v[0]!); } },
    });
    expect(r.status).toBe('finished');
    // a fact of the law: the guard opens the switch exactly at the limit
    expect(imax).toBeLessThanOrEqual(3 + 1e-9);
    expect(imax).toBeGreaterThan(2.99);
  });

  it('fails the run naming the sample when compute returns NaN or a value outside [0, 1]', () => {
    const st = buck();
    for (const [bad, text] of [[Number.NaN, 'NaN'], [1.5, '1.5'], [-0.2, '-0.2']] as const) {
      const law = digitalControl(st, { measure: [], compute: (s) => (s.index === 5 ? bad : 0.3) });
      const { run } = onTimes(closeLoop(st, law), 10);
      expect(run.status).toBe('failed');
      expect(run.message).toContain(`compute returned ${text} at sample 5`);
      expect(run.message).toContain('a duty must be a finite number in [0, 1]');
      expect(run.timeS).toBeCloseTo(5 * T, 15);
    }
  });

  it('rejects bad parameters naming each one', () => {
    const st = buck();
    expect(() => digitalControl(st, { measure: [], compute: () => 0.5, samplePeriodS: 1.5 * T, delaySamples: 0.5, maxDuty: 2 })).toThrow(
      /samplePeriodS: must be a whole multiple of the switching period[\s\S]*delaySamples: must be a whole number >= 0[\s\S]*maxDuty: must be a number in \[0, 1\]/,
    );
    expect(() => digitalControl(st, { measure: [], compute: () => 0.5, minDuty: 0.6, maxDuty: 0.4 })).toThrow(/minDuty: must not exceed maxDuty/);
  });
});
