import type { BlockSpec, ControlContext, Controller } from '@edgewise/engine';
import type { ControlLaw, Stage } from '../stage.ts';
import { Issues } from '../stages/common.ts';
import { SwitchDriver, checkDriveOptions, type DriveOptions } from './switch-driver.ts';

/** How long each on-time lasts. */
export type OnTimeSpec =
  | {
      /** A fixed on-time. */
      readonly kind: 'fixed';
      /** On-time, seconds. */
      readonly seconds: number;
    }
  | {
      /**
       * An on-time proportional to the ideal CCM duty, computed from the measured input and
       * output voltages at the start of each on-time so that the CCM switching frequency
       * stays near `frequencyHz` whatever the line and output: ton = D / f with
       * D = Vo/Vin (buck), 1 - Vin/Vo (boost), |Vo|/(Vin + |Vo|) (inverting buck-boost).
       */
      readonly kind: 'adaptive';
      /** Target CCM switching frequency, hertz. */
      readonly frequencyHz: number;
      /** Shortest on-time, seconds (default 0.02 / frequencyHz; also used while Vo is still near 0). */
      readonly minS?: number;
      /** Longest on-time, seconds (default 0.9 / frequencyHz). */
      readonly maxS?: number;
    };

/** Ripple added to the fed-back output voltage so that a low-ESR output still gives a usable valley signal. */
export type RippleInjection =
  | {
      /** Adds ohms * inductor current, like a capacitor ESR would (leaves a load-dependent offset). */
      readonly kind: 'current';
      /** Gain from inductor current to feedback volts, ohms. */
      readonly ohms: number;
    }
  | {
      /** Subtracts a ramp that restarts from 0 at each end of on-time. */
      readonly kind: 'ramp';
      /** Slope of the ramp, volts per second. */
      readonly voltsPerS: number;
    };

/** Parameters of {@link constantOnTime}. All times in seconds, voltages in volts. */
export interface ConstantOnTimeParams extends DriveOptions {
  /** Reference the feedback voltage is compared with, volts (in feedback units: after the divider). */
  readonly referenceVolts: number;
  readonly onTime: OnTimeSpec;
  /** Shortest off-time between two on-times, seconds (> 0: it caps the frequency at 1/(ton + toff,min)). */
  readonly minOffTimeS: number;
  /**
   * Divider gain from the output voltage to the feedback voltage, V/V (default 1; -1 for the
   * inverting buck-boost so that the feedback is positive).
   */
  readonly feedbackGain?: number;
  readonly rippleInjection?: RippleInjection;
  /**
   * Lowest switching frequency, hertz: an on-time is forced when none has started for
   * 1/minFrequencyHz (keeps light-load ripple out of an audible or sensitive band). Default none.
   */
  readonly minFrequencyHz?: number;
  /** Cycle-by-cycle current limit: the on-time ends when the inductor current rises to peakAmps, amperes. */
  readonly currentLimit?: { readonly peakAmps: number };
  /** Prefix of the ids of the blocks this law adds (default "cot"). */
  readonly id?: string;
}

const TAG_ON_END = 1;
const TAG_OFF_END = 2;
const TAG_VALLEY = 3;
const TAG_FORCE = 4;
const TAG_LIMIT = 5;

function dutyOf(stage: Stage, vin: number, vout: number): number {
  const vo = Math.abs(vout);
  if (!(vin > 0)) return 0;
  switch (stage.kind) {
    case 'buck':
      return vo / vin;
    case 'boost':
      return vo > vin ? 1 - vin / vo : 0;
    case 'buck-boost':
      return vo / (vin + vo);
  }
}

/**
 * Constant on-time control with a minimum off-time (a valley-triggered pulse-frequency
 * mode): each on-time lasts a fixed (or adaptive) time; the next one starts when the
 * feedback voltage (divider gain times the output voltage, plus optional ripple injection)
 * falls to the reference, located exactly by a guard, but not before the minimum off-time.
 * In CCM the switching frequency settles near D / ton; at light load with diode emulation
 * (or a diode rectifier) the off-times grow and the frequency falls. Works with every stage.
 *
 * @throws ParameterError naming each invalid parameter.
 */
export function constantOnTime(stage: Stage, params: ConstantOnTimeParams): ControlLaw {
  const issues = new Issues('constant on-time parameters');
  issues.finite('referenceVolts', params.referenceVolts, 0);
  if (params.referenceVolts === undefined) issues.add('referenceVolts', 'is required', undefined);
  const ot = params.onTime;
  if (ot === undefined || ot === null || typeof ot !== 'object') issues.add('onTime', 'must be { kind: "fixed", seconds } or { kind: "adaptive", frequencyHz }', ot);
  else if (ot.kind === 'fixed') issues.positive('onTime.seconds', ot.seconds);
  else if (ot.kind === 'adaptive') {
    issues.positive('onTime.frequencyHz', ot.frequencyHz);
    issues.positive('onTime.minS', ot.minS, true);
    issues.positive('onTime.maxS', ot.maxS, true);
    if (ot.minS !== undefined && ot.maxS !== undefined && ot.minS > ot.maxS) issues.add('onTime.minS', 'must not exceed onTime.maxS', ot.minS);
  } else issues.add('onTime.kind', 'must be "fixed" or "adaptive"', (ot as { kind?: unknown }).kind);
  issues.positive('minOffTimeS', params.minOffTimeS);
  if (params.feedbackGain !== undefined) {
    issues.finite('feedbackGain', params.feedbackGain, 1);
    if (params.feedbackGain === 0) issues.add('feedbackGain', 'must not be 0', 0);
  }
  const inj = params.rippleInjection;
  if (inj !== undefined) {
    if (inj.kind === 'current') issues.positive('rippleInjection.ohms', inj.ohms);
    else if (inj.kind === 'ramp') issues.positive('rippleInjection.voltsPerS', inj.voltsPerS);
    else issues.add('rippleInjection.kind', 'must be "current" or "ramp"', (inj as { kind?: unknown }).kind);
  }
  issues.positive('minFrequencyHz', params.minFrequencyHz, true);
  if (params.minFrequencyHz !== undefined && ot?.kind === 'fixed' && 1 / params.minFrequencyHz <= ot.seconds + params.minOffTimeS) {
    issues.add('minFrequencyHz', 'must be below 1 / (onTime.seconds + minOffTimeS)', params.minFrequencyHz);
  }
  if (params.currentLimit !== undefined) issues.positive('currentLimit.peakAmps', params.currentLimit.peakAmps);
  const id = params.id ?? 'cot';
  if (typeof id !== 'string' || !/^[A-Za-z_][A-Za-z0-9_-]*$/.test(id)) issues.add('id', 'must be letters, digits, "_" or "-" (no dots)', id);
  checkDriveOptions(issues, params);
  issues.done();

  const gain = params.feedbackGain ?? (stage.kind === 'buck-boost' ? -1 : 1);
  const rampId = `${id}Ramp`;
  const blocks: BlockSpec[] = inj?.kind === 'ramp' ? [{ kind: 'ramp', id: rampId, slopePerS: inj.voltsPerS }] : [];
  const terms: { signal: string; gain: number }[] = [{ signal: stage.signals.outputVoltage, gain }];
  if (inj?.kind === 'current') terms.push({ signal: stage.signals.inductorCurrent, gain: inj.ohms });
  if (inj?.kind === 'ramp') terms.push({ signal: `${rampId}.out`, gain: -1 });
  const ref = params.referenceVolts;
  const minOff = params.minOffTimeS;
  const forceS = params.minFrequencyHz !== undefined ? 1 / params.minFrequencyHz : 0;
  const limitA = params.currentLimit?.peakAmps;
  const fixedS = ot.kind === 'fixed' ? ot.seconds : 0;
  const adaptF = ot.kind === 'adaptive' ? ot.frequencyHz : 0;
  const adaptMin = ot.kind === 'adaptive' ? (ot.minS ?? 0.02 / ot.frequencyHz) : 0;
  const adaptMax = ot.kind === 'adaptive' ? (ot.maxS ?? 0.9 / ot.frequencyHz) : 0;

  const createController = (): Controller => {
    const drv = new SwitchDriver(stage, params);
    const h = new Int32Array(terms.length);
    let valley = -1, limit = -1, ramp = -1, vin = -1, vout = -1;
    const feedback = (ctx: ControlContext): number => {
      let s = -ref;
      for (let k = 0; k < terms.length; k++) s += terms[k]!.gain * ctx.read(h[k]!);
      return s;
    };
    const startOn = (ctx: ControlContext): void => {
      if (limitA !== undefined && ctx.read(drv.inductorCurrentHandle) >= limitA) {
        // already at the limit: skip this on-time and wait another minimum off-time
        ctx.after(TAG_OFF_END, minOff);
        return;
      }
      let ton = fixedS;
      if (adaptF > 0) {
        const d = dutyOf(stage, ctx.read(vin), ctx.read(vout));
        ton = Math.min(adaptMax, Math.max(adaptMin, d / adaptF));
      }
      const delay = drv.requestOn(ctx);
      ctx.after(TAG_ON_END, delay + ton);
      if (limit >= 0) ctx.arm(limit, TAG_LIMIT);
      if (forceS > 0) ctx.after(TAG_FORCE, forceS);
    };
    const endOn = (ctx: ControlContext): void => {
      ctx.cancel(TAG_ON_END);
      if (limit >= 0) ctx.disarm(limit);
      drv.requestOff(ctx);
      if (ramp >= 0) ctx.setBlockState(ramp, 0);
      ctx.after(TAG_OFF_END, minOff);
    };
    return {
      start(ctx) {
        drv.start(ctx);
        for (let k = 0; k < terms.length; k++) h[k] = ctx.signal(terms[k]!.signal);
        vin = ctx.signal(stage.signals.inputVoltage);
        vout = ctx.signal(stage.signals.outputVoltage);
        valley = ctx.guard({ terms, threshold: ref, direction: 'falling' });
        if (limitA !== undefined) limit = ctx.guard({ signal: stage.signals.inductorCurrent, threshold: limitA, direction: 'rising' });
        if (inj?.kind === 'ramp') ramp = ctx.block(rampId);
        // the first decision is taken at t = 0 in the settled topology
        ctx.after(TAG_OFF_END, 0);
      },
      onEvent(ctx, tag) {
        if (drv.onEvent(ctx, tag)) return;
        switch (tag) {
          case TAG_OFF_END:
            if (feedback(ctx) <= 0) startOn(ctx);
            else ctx.arm(valley, TAG_VALLEY);
            break;
          case TAG_VALLEY:
            ctx.disarm(valley);
            startOn(ctx);
            break;
          case TAG_ON_END:
          case TAG_LIMIT:
            endOn(ctx);
            break;
          case TAG_FORCE:
            if (!drv.on) {
              ctx.disarm(valley);
              ctx.cancel(TAG_OFF_END);
              startOn(ctx);
            }
            break;
        }
      },
    };
  };
  return { blocks, measurements: [], createController, timeBaseS: stage.periodS };
}
