import type { ControlContext, Controller } from '@edgewise/engine';
import type { ControlLaw, Stage } from '../stage.ts';
import { Issues } from '../stages/common.ts';
import { SwitchDriver, checkDriveOptions, type DriveOptions } from './switch-driver.ts';

/** Parameters of {@link hysteretic}. Voltages in volts, times in seconds. */
export interface HystereticParams extends DriveOptions {
  /** Centre of the band, in feedback volts (after the divider). */
  readonly referenceVolts: number;
  /** Width of the band, volts (> 0): on below reference - band/2, off above reference + band/2. */
  readonly bandVolts: number;
  /** Divider gain from the output voltage to the feedback voltage, V/V (default 1; -1 for the inverting buck-boost). */
  readonly feedbackGain?: number;
  /**
   * Comparator and driver delay, seconds (default 0): a threshold crossing acts on the gates
   * this much later. Crossings spaced closer than the delay are merged (the last one of a
   * kind wins).
   */
  readonly comparatorDelayS?: number;
  /**
   * Cycle-by-cycle current limit: the main switch opens when the inductor current rises to
   * peakAmps, amperes, and stays open for offTimeS, seconds, before the comparator may
   * close it again.
   */
  readonly currentLimit?: { readonly peakAmps: number; readonly offTimeS: number };
}

const TAG_INIT = 1;
const TAG_LOW = 2;
const TAG_HIGH = 3;
const TAG_ACT_ON = 4;
const TAG_ACT_OFF = 5;
const TAG_LIMIT = 6;
const TAG_RELEASE = 7;

/**
 * Hysteretic (bang-bang) control of the output voltage: the main switch closes when the
 * feedback voltage falls to reference - band/2 and opens when it rises to reference + band/2,
 * both crossings located exactly by guards, with an optional comparator delay. No clock: the
 * switching frequency follows from the band, the output filter and the delay. Works with
 * every stage (for the boost and buck-boost the output only rises during the off-time, so
 * the law acts on the energy stored per cycle and needs a current limit to stay bounded).
 *
 * @throws ParameterError naming each invalid parameter.
 */
export function hysteretic(stage: Stage, params: HystereticParams): ControlLaw {
  const issues = new Issues('hysteretic control parameters');
  if (params.referenceVolts === undefined) issues.add('referenceVolts', 'is required', undefined);
  issues.finite('referenceVolts', params.referenceVolts, 0);
  issues.positive('bandVolts', params.bandVolts);
  if (params.feedbackGain !== undefined) {
    issues.finite('feedbackGain', params.feedbackGain, 1);
    if (params.feedbackGain === 0) issues.add('feedbackGain', 'must not be 0', 0);
  }
  issues.nonNegative('comparatorDelayS', params.comparatorDelayS, 0);
  if (params.currentLimit !== undefined) {
    issues.positive('currentLimit.peakAmps', params.currentLimit.peakAmps);
    issues.positive('currentLimit.offTimeS', params.currentLimit.offTimeS);
  }
  checkDriveOptions(issues, params);
  issues.done();

  const gain = params.feedbackGain ?? (stage.kind === 'buck-boost' ? -1 : 1);
  const low = params.referenceVolts - params.bandVolts / 2;
  const high = params.referenceVolts + params.bandVolts / 2;
  const delayS = params.comparatorDelayS ?? 0;
  const limitA = params.currentLimit?.peakAmps;
  const limitOffS = params.currentLimit?.offTimeS ?? 0;
  const vo = stage.signals.outputVoltage;

  const createController = (): Controller => {
    const drv = new SwitchDriver(stage, params);
    let gLow = -1, gHigh = -1, gLimit = -1, hVo = -1;
    let wantOn = false;
    let limited = false;
    const actOn = (ctx: ControlContext): void => {
      if (limited || drv.on) return;
      drv.requestOn(ctx);
      if (gLimit >= 0) ctx.arm(gLimit, TAG_LIMIT);
    };
    const actOff = (ctx: ControlContext): void => {
      if (gLimit >= 0) ctx.disarm(gLimit);
      if (drv.on) drv.requestOff(ctx);
    };
    const compare = (ctx: ControlContext, on: boolean): void => {
      wantOn = on;
      if (on) {
        ctx.disarm(gLow);
        ctx.arm(gHigh, TAG_HIGH);
      } else {
        ctx.disarm(gHigh);
        ctx.arm(gLow, TAG_LOW);
      }
    };
    return {
      start(ctx) {
        drv.start(ctx);
        hVo = ctx.signal(vo);
        gLow = ctx.guard({ terms: [{ signal: vo, gain }], threshold: low, direction: 'falling' });
        gHigh = ctx.guard({ terms: [{ signal: vo, gain }], threshold: high, direction: 'rising' });
        if (limitA !== undefined) gLimit = ctx.guard({ signal: stage.signals.inductorCurrent, threshold: limitA, direction: 'rising' });
        wantOn = false;
        limited = false;
        ctx.after(TAG_INIT, 0);
      },
      onEvent(ctx, tag) {
        if (drv.onEvent(ctx, tag)) return;
        switch (tag) {
          case TAG_INIT:
            // start in the state the comparator would reach from below the band
            compare(ctx, gain * ctx.read(hVo) < high);
            if (wantOn) actOn(ctx);
            break;
          case TAG_LOW:
            compare(ctx, true);
            if (delayS > 0) ctx.after(TAG_ACT_ON, delayS);
            else actOn(ctx);
            break;
          case TAG_HIGH:
            compare(ctx, false);
            if (delayS > 0) ctx.after(TAG_ACT_OFF, delayS);
            else actOff(ctx);
            break;
          case TAG_ACT_ON:
            actOn(ctx);
            break;
          case TAG_ACT_OFF:
            actOff(ctx);
            break;
          case TAG_LIMIT:
            ctx.disarm(gLimit);
            if (drv.on) drv.requestOff(ctx);
            limited = true;
            ctx.after(TAG_RELEASE, limitOffS);
            break;
          case TAG_RELEASE:
            limited = false;
            if (wantOn) actOn(ctx);
            break;
        }
      },
    };
  };
  return { blocks: [], measurements: [], createController, timeBaseS: stage.periodS };
}
