import type { BlockSpec } from '@edgewise/engine';
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

/** Voltage-mode control with an analog error amplifier and a sawtooth PWM comparator. */
export interface VoltageModeParams extends PwmCommonParams, ReferenceParams {
  /** Error amplifier (compensator) acting on reference - feedbackGain * output voltage. */
  readonly compensator: CompensatorParams;
  /** PWM sawtooth: valley (default 0 V) and peak-to-peak amplitude (default 1 V), volts. */
  readonly ramp?: { readonly valleyVolts?: number; readonly peakToPeakVolts?: number };
  /** Duty clamp (default 1 for a buck, 0.9 otherwise; must be < 1 for boost and buck-boost). */
  readonly maxDuty?: number;
  /**
   * Pulse skipping: when the compensator output is below this level at a clock edge, the
   * pulse is skipped (main switch off for the whole cycle), volts (default: no skipping other
   * than the natural one below the ramp valley).
   */
  readonly skipBelowVolts?: number;
  /** Compensator output at t = 0, volts (default 0; not for a transfer-function compensator). */
  readonly initialControlVolts?: number;
}

/** Block id of the PWM sawtooth. */
export const PWM_RAMP_ID = 'RAMP';

/**
 * Voltage-mode control: the compensator (a linear block in the state, driven by the output
 * voltage through feedbackGain and by the reference block) gives the control voltage vc; a
 * sawtooth (a ramp block reset to its valley at each clock edge) is compared with vc by a
 * guard, ending the pulse when the ramp reaches vc; duty clamp, pulse skipping, soft start,
 * dead time, diode emulation and current limit as configured. Duty = (vc - valley) / Vpp.
 * Throws {@link ParameterError} naming every invalid parameter.
 */
export function voltageMode(stage: Stage, params: VoltageModeParams): PwmControlLaw {
  const is = new Issues('voltage-mode parameters');
  if (!checkStage(is, stage)) is.done();
  const p = params ?? ({} as VoltageModeParams);
  const T = stage.periodS;
  const { bridge, currentLimit } = resolveCommon(is, stage, p);
  const maxDuty = resolveMaxDuty(is, stage, p.maxDuty);
  let valley = 0, vpp = 1;
  if (is.object('ramp', p.ramp, true)) {
    valley = is.finite('ramp.valleyVolts', p.ramp!.valleyVolts, 0);
    vpp = p.ramp!.peakToPeakVolts === undefined ? 1 : is.positive('ramp.peakToPeakVolts', p.ramp!.peakToPeakVolts);
  }
  const skipBelow = p.skipBelowVolts === undefined ? null : is.finite('skipBelowVolts', p.skipBelowVolts, 0);
  const loop = buildVoltageLoop(is, stage, p);
  is.done();

  const ramp: BlockSpec = { kind: 'ramp', id: PWM_RAMP_ID, slopePerS: vpp / T, initial: valley };
  const vc = `${LOOP_IDS.compensator}.out`;
  return {
    blocks: [...loop!.blocks, ramp],
    measurements: loop!.measurements,
    timeBaseS: T,
    createController: () =>
      createPwmController({
        periodS: T,
        bridge,
        rampResets: [{ block: PWM_RAMP_ID, value: valley }],
        onTimeS: null,
        minOnTimeS: 0,
        skip: skipBelow === null ? null : { signal: vc, below: skipBelow },
        // the pulse ends when the sawtooth rises through the control voltage
        comparator: { terms: [{ signal: `${PWM_RAMP_ID}.out`, gain: 1 }, { signal: vc, gain: -1 }], threshold: 0, direction: 'rising' },
        comparatorFrom: 'clock',
        blankingS: 0,
        maxDuty,
        currentLimit,
        reference: { ...loop!.reference, block: LOOP_IDS.reference },
      }),
  };
}
