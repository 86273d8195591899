/**
 * edgewise models: converter stages, control laws, loss models and analyses.
 * @packageDocumentation
 */
export * from './stage.ts';
export * from './stages/index.ts';
export { openLoopPwm } from './control/pwm.ts';
export type { OpenLoopPwmParams } from './control/pwm.ts';
export { voltageMode, PWM_RAMP_ID } from './control/voltage-mode.ts';
export type { VoltageModeParams } from './control/voltage-mode.ts';
export { peakCurrentMode, SLOPE_RAMP_ID } from './control/peak-current.ts';
export type { CurrentCommand, PeakCurrentModeParams } from './control/peak-current.ts';
export { BridgeDriver, DRIVER_TAGS } from './control/dead-time.ts';
export type { BridgeDriverConfig, DeadTimeParams, LightLoadMode } from './control/dead-time.ts';
export { LOOP_IDS, isHurwitz } from './control/common.ts';
export type {
  CompensatorParams,
  CurrentLimitParams,
  PwmCommonParams,
  PwmControlLaw,
  PwmController,
  PwmStats,
  ReferenceParams,
} from './control/common.ts';
export { constantOnTime } from './control/constant-on-time.ts';
export type { ConstantOnTimeParams, OnTimeSpec, RippleInjection } from './control/constant-on-time.ts';
export { hysteretic } from './control/hysteretic.ts';
export type { HystereticParams } from './control/hysteretic.ts';
export { digitalControl } from './control/digital.ts';
export type { DigitalControlParams, DigitalMeasure, DigitalSample, DigitalValues } from './control/digital.ts';
export { SwitchDriver } from './control/switch-driver.ts';
export type { DriveOptions } from './control/switch-driver.ts';
export * from './losses/index.ts';
export * from './analyses/index.ts';
