import type { ControlContext, Controller } from '@edgewise/engine';
import type { ControlLaw, Stage } from '../stage.ts';
import { Issues } from '../stages/common.ts';
import { SwitchDriver, checkDriveOptions, type DriveOptions } from './switch-driver.ts';

/** Signals a digital controller samples: a list (values come as an array in the same order) or a map alias -> signal name. */
export type DigitalMeasure = readonly string[] | Readonly<Record<string, string>>;

/** The sampled values, shaped like the {@link DigitalMeasure} that asked for them. */
export type DigitalValues<M extends DigitalMeasure> = M extends readonly string[]
  ? readonly number[]
  : { readonly [K in keyof M]: number };

/**
 * One sample handed to the user's compute function. The object and its `values` are reused
 * from sample to sample (no allocation per sample): copy what you keep.
 */
export interface DigitalSample<M extends DigitalMeasure = DigitalMeasure> {
  /** Sampling instant, seconds. */
  readonly timeS: number;
  /** Sample number, from 0 at the start of each run (reset your own state at 0). */
  readonly index: number;
  readonly values: DigitalValues<M>;
}

/** Parameters of {@link digitalControl}. Times in seconds; duties as fractions of the switching period. */
export interface DigitalControlParams<M extends DigitalMeasure = DigitalMeasure> extends DriveOptions {
  /** Signals to sample (engine signal names, e.g. `stage.signals.outputVoltage`). */
  readonly measure: M;
  /**
   * User code: returns the duty for this sample, a finite number in [0, 1] (then clamped to
   * [minDuty, maxDuty]). Anything else fails the run with a message naming the sample.
   */
  readonly compute: (sample: DigitalSample<M>) => number;
  /** Switching (PWM carrier) period, seconds (default the stage's period). */
  readonly switchingPeriodS?: number;
  /** Sampling period, seconds: a whole multiple of the switching period (default equal to it). */
  readonly samplePeriodS?: number;
  /** Sampling instant within the switching period, seconds, in [0, period) (default 0: at the carrier start). */
  readonly sampleOffsetS?: number;
  /**
   * Compute delay in samples (default 1): the duty computed at sample n is written to the
   * PWM register at sample n + delaySamples; the PWM latches the register at the start of
   * each switching period (uniformly sampled trailing-edge PWM).
   */
  readonly delaySamples?: number;
  /** Smallest duty (default 0). */
  readonly minDuty?: number;
  /** Largest duty (default 1). */
  readonly maxDuty?: number;
  /** Duty in the register before the first computed duty arrives (default minDuty). */
  readonly initialDuty?: number;
  /** Cycle-by-cycle current limit: the main switch opens for the rest of the period when the inductor current rises to peakAmps, amperes. */
  readonly currentLimit?: { readonly peakAmps: number };
}

const TAG_CYCLE = 1;
const TAG_SAMPLE = 2;
const TAG_PWM_OFF = 3;
const TAG_LIMIT = 4;

/**
 * Sampled digital control: at each sampling instant the user's compute function gets the
 * measured signals and returns a duty, which reaches a uniformly sampled trailing-edge PWM
 * after a compute delay of a whole number of samples. With dead time the main switch
 * conducts from the carrier start plus the dead time to duty * period.
 *
 * @throws ParameterError naming each invalid parameter.
 */
export function digitalControl<M extends DigitalMeasure>(stage: Stage, params: DigitalControlParams<M>): ControlLaw {
  const issues = new Issues('digital control parameters');
  const m = params.measure as DigitalMeasure;
  let names: string[] = [];
  let keys: string[] | null = null;
  if (Array.isArray(m)) {
    names = m.map(String);
    if (!m.every((s) => typeof s === 'string' && s.length > 0)) issues.add('measure', 'must list signal names', m);
  } else if (m !== null && typeof m === 'object') {
    keys = Object.keys(m);
    names = keys.map((k) => (m as Record<string, string>)[k]!);
    if (!names.every((s) => typeof s === 'string' && s.length > 0)) issues.add('measure', 'must map names to signal names', m);
  } else issues.add('measure', 'must be an array of signal names or an object alias -> signal name', m);
  if (typeof params.compute !== 'function') issues.add('compute', 'must be a function (sample) => duty', params.compute);
  const periodS = params.switchingPeriodS ?? stage.periodS;
  issues.positive('switchingPeriodS', params.switchingPeriodS, true);
  const sampleS = params.samplePeriodS ?? periodS;
  issues.positive('samplePeriodS', params.samplePeriodS, true);
  const ratio = Math.round(sampleS / periodS);
  if (params.samplePeriodS !== undefined && Number.isFinite(sampleS) && sampleS > 0 && (ratio < 1 || Math.abs(ratio * periodS - sampleS) > 1e-9 * sampleS)) {
    issues.add('samplePeriodS', 'must be a whole multiple of the switching period', params.samplePeriodS);
  }
  const offS = params.sampleOffsetS ?? 0;
  if (params.sampleOffsetS !== undefined && !(typeof offS === 'number' && offS >= 0 && offS < periodS)) {
    issues.add('sampleOffsetS', 'must be a time in [0, switching period) s', params.sampleOffsetS);
  }
  const delay = params.delaySamples ?? 1;
  if (!(Number.isInteger(delay) && delay >= 0)) issues.add('delaySamples', 'must be a whole number >= 0', params.delaySamples);
  const dmin = issues.inRange('minDuty', params.minDuty, 0, 1, 0);
  const dmax = issues.inRange('maxDuty', params.maxDuty, 0, 1, 1);
  if (dmin > dmax) issues.add('minDuty', 'must not exceed maxDuty', params.minDuty);
  const d0 = issues.inRange('initialDuty', params.initialDuty, dmin, dmax, dmin);
  if (params.currentLimit !== undefined) issues.positive('currentLimit.peakAmps', params.currentLimit.peakAmps);
  checkDriveOptions(issues, params);
  issues.done();

  const compute = params.compute as (s: DigitalSample) => number;
  const limitA = params.currentLimit?.peakAmps;

  const createController = (): Controller => {
    const drv = new SwitchDriver(stage, params);
    const h = new Int32Array(names.length);
    const arr = new Array<number>(names.length).fill(0);
    const rec: Record<string, number> = {};
    if (keys) for (const k of keys) rec[k] = 0;
    const sample = { timeS: 0, index: 0, values: (keys ? rec : arr) as DigitalValues<DigitalMeasure> };
    const ring = new Float64Array(delay + 1);
    let n = 0;
    let register = d0;
    let gLimit = -1;
    const doSample = (ctx: ControlContext): void => {
      for (let i = 0; i < h.length; i++) {
        const v = ctx.read(h[i]!);
        if (keys) rec[keys[i]!] = v;
        else arr[i] = v;
      }
      sample.timeS = ctx.timeS;
      sample.index = n;
      const d = compute(sample);
      if (typeof d !== 'number' || !(d >= 0 && d <= 1)) {
        throw new Error(
          `digital control: compute returned ${typeof d === 'number' ? String(d) : typeof d} at sample ${n} (t = ${ctx.timeS} s); a duty must be a finite number in [0, 1]`,
        );
      }
      ring[n % (delay + 1)] = d < dmin ? dmin : d > dmax ? dmax : d;
      if (n >= delay) register = ring[(n - delay) % (delay + 1)]!;
      n++;
    };
    return {
      start(ctx) {
        drv.start(ctx);
        for (let i = 0; i < names.length; i++) h[i] = ctx.signal(names[i]!);
        if (limitA !== undefined) gLimit = ctx.guard({ signal: stage.signals.inductorCurrent, threshold: limitA, direction: 'rising' });
        n = 0;
        register = d0;
        ctx.at(TAG_CYCLE, 0, 0);
        if (offS > 0) ctx.at(TAG_SAMPLE, 0, offS);
      },
      onEvent(ctx, tag) {
        if (drv.onEvent(ctx, tag)) return;
        switch (tag) {
          case TAG_CYCLE: {
            const k = ctx.cycle;
            // a sample at the carrier start is taken before the register is latched
            if (offS === 0 && k % ratio === 0) doSample(ctx);
            const duty = register;
            ctx.cancel(TAG_PWM_OFF);
            if (duty <= 0) {
              if (drv.on) drv.requestOff(ctx);
            } else {
              if (!drv.on) drv.requestOn(ctx);
              if (gLimit >= 0) ctx.arm(gLimit, TAG_LIMIT);
              if (duty < 1) ctx.at(TAG_PWM_OFF, k, duty * periodS);
            }
            ctx.at(TAG_CYCLE, k + 1, 0);
            break;
          }
          case TAG_SAMPLE:
            doSample(ctx);
            ctx.at(TAG_SAMPLE, ctx.cycle + ratio, offS);
            break;
          case TAG_PWM_OFF:
          case TAG_LIMIT:
            if (gLimit >= 0) ctx.disarm(gLimit);
            if (drv.on) drv.requestOff(ctx);
            break;
        }
      },
    };
  };
  return { blocks: [], measurements: [], createController, timeBaseS: periodS };
}
