import type { BlockSpec, GuardSpec } from '@edgewise/engine';
import type { Stage } from '../stage.ts';
import { Issues } from '../stages/common.ts';
import {
  buildVoltageLoop,
  checkStage,
  createPwmController,
  LOOP_IDS,
  resolveCommon,
  resolveMaxDuty,
  type CompensatorParams,
  type PwmCommonParams,
  type PwmControlLaw,
  type ReferenceParams,
} from './common.ts';

/** Current command of a peak-current-mode law. */
export type CurrentCommand =
  /** A fixed control voltage, volts (open-loop current mode; or give the peak current in amperes). */
  | { readonly kind: 'fixed'; readonly volts?: number; readonly peakAmps?: number }
  /** An outer voltage loop whose compensator output is the control voltage. */
  | (ReferenceParams & {
      readonly kind: 'voltage-loop';
      readonly compensator: CompensatorParams;
      /** Compensator output at t = 0, volts (default 0). */
      readonly initialControlVolts?: number;
    });

/** Peak current-mode control. */
export interface PeakCurrentModeParams extends PwmCommonParams {
  /** Current-sense gain Ri, ohms (volts of sense signal per ampere of inductor current), > 0. */
  readonly senseOhms: number;
  /** Slope compensation: a ramp of this slope, volts per second, added to the sensed current (default 0). */
  readonly slopeCompensationVPerS?: number;
  /** Maximum duty (default 1 for a buck, 0.9 otherwise; must be < 1 for boost and buck-boost). */
  readonly maxDuty?: number;
  /** Leading-edge blanking: the comparator is armed this long after the main switch turns on, seconds (default 0). */
  readonly blankingS?: number;
  readonly command: CurrentCommand;
}

/** Block id of the slope-compensation ramp. */
export const SLOPE_RAMP_ID = 'SLOPE';

/**
 * Peak current-mode control: a clock-set, comparator-reset latch. The clock turns the main
 * switch on; a guard on Ri * iL + slope ramp - vc rising through zero (armed after the
 * blanking time) turns it off; the slope ramp is a ramp block reset at each clock edge. vc is a
 * fixed command or the output of an outer voltage loop (a compensator block). Maximum duty,
 * dead time, diode emulation, current limit and soft start as configured.
 * Throws {@link ParameterError} naming every invalid parameter.
 */
export function peakCurrentMode(stage: Stage, params: PeakCurrentModeParams): PwmControlLaw {
  const is = new Issues('peak current-mode parameters');
  if (!checkStage(is, stage)) is.done();
  const p = params ?? ({} as PeakCurrentModeParams);
  const T = stage.periodS;
  const { bridge, currentLimit } = resolveCommon(is, stage, p);
  const maxDuty = resolveMaxDuty(is, stage, p.maxDuty);
  const ri = is.positive('senseOhms', p.senseOhms);
  const se = is.nonNegative('slopeCompensationVPerS', p.slopeCompensationVPerS, 0);
  const blank = is.nonNegative('blankingS', p.blankingS, 0);
  if (blank >= T) is.add('blankingS', `must be shorter than the switching period ${T} s`, p.blankingS);
  const cmd = p.command;
  let fixedVolts = Number.NaN;
  let loop: ReturnType<typeof buildVoltageLoop> = null;
  if (is.object('command', cmd)) {
    if (cmd.kind === 'fixed') {
      if ((cmd.volts === undefined) === (cmd.peakAmps === undefined)) {
        is.add('command', 'give exactly one of volts and peakAmps', cmd);
      } else if (cmd.volts !== undefined) fixedVolts = is.finite('command.volts', cmd.volts, Number.NaN);
      else fixedVolts = is.finite('command.peakAmps', cmd.peakAmps, Number.NaN) * ri;
    } else if (cmd.kind === 'voltage-loop') {
      const sub = new Issues('');
      loop = buildVoltageLoop(sub, stage, cmd);
      for (const i of sub.list) is.add(`command.${i.path}`, i.message, i.received);
    } else {
      is.add('command.kind', "must be 'fixed' or 'voltage-loop'", (cmd as { kind?: unknown }).kind);
    }
  }
  is.done();

  const blocks: BlockSpec[] = loop ? [...loop.blocks] : [];
  const terms: { signal: string; gain: number }[] = [{ signal: stage.signals.inductorCurrent, gain: ri }];
  if (se > 0) {
    blocks.push({ kind: 'ramp', id: SLOPE_RAMP_ID, slopePerS: se, initial: 0 });
    terms.push({ signal: `${SLOPE_RAMP_ID}.out`, gain: 1 });
  }
  let comparator: GuardSpec;
  if (loop) {
    terms.push({ signal: `${LOOP_IDS.compensator}.out`, gain: -1 });
    comparator = { terms, threshold: 0, direction: 'rising' };
  } else {
    comparator = { terms, threshold: fixedVolts, direction: 'rising' };
  }
  return {
    blocks,
    measurements: loop ? loop.measurements : [],
    timeBaseS: T,
    createController: () =>
      createPwmController({
        periodS: T,
        bridge,
        rampResets: se > 0 ? [{ block: SLOPE_RAMP_ID, value: 0 }] : [],
        onTimeS: null,
        minOnTimeS: 0,
        skip: null,
        comparator,
        comparatorFrom: 'main-on',
        blankingS: blank,
        maxDuty,
        currentLimit,
        reference: loop ? { ...loop.reference, block: LOOP_IDS.reference } : null,
      }),
  };
}
