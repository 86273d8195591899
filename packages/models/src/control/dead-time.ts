import type { ControlContext } from '@edgewise/engine';
import type { Stage } from '../stage.ts';
import type { Issues } from '../stages/common.ts';

/** Light-load behaviour of a synchronous stage. */
export type LightLoadMode = 'forced-ccm' | 'diode-emulation';

/**
 * Break-before-make dead times of a synchronous stage, seconds. Both default to 0 (the
 * switches change over at the same instant, which is safe only with ideal timing).
 */
export interface DeadTimeParams {
  /** Delay from the main switch turning off to the synchronous switch turning on, seconds (>= 0). */
  readonly mainOffToSyncOnS?: number;
  /** Delay from the synchronous switch turning off to the main switch turning on, seconds (>= 0). */
  readonly syncOffToMainOnS?: number;
}

/** Resolved settings of a {@link BridgeDriver}. */
export interface BridgeDriverConfig {
  readonly mainGate: string;
  /** Synchronous gate; absent for diode-rectified stages. */
  readonly syncGate?: string;
  readonly mainOffToSyncOnS: number;
  readonly syncOffToMainOnS: number;
  readonly mode: LightLoadMode;
  /** Rectifier current in its conducting direction (the zero-cross detector's input). */
  readonly rectifierCurrent: string;
  /** Inductor current (carried by the rectifier once the main switch is off). */
  readonly inductorCurrent: string;
}

/** Timer and guard tags used by the driver (controllers using it must not reuse them). */
export const DRIVER_TAGS = { mainOn: 9001, syncOn: 9002, zeroCross: 9003 } as const;

/**
 * Validates dead-time and light-load options against a stage and resolves them.
 * Errors name `deadTime.*` or `lightLoad`.
 */
export function resolveBridge(
  is: Issues,
  stage: Stage,
  deadTime: DeadTimeParams | undefined,
  lightLoad: LightLoadMode | undefined,
): BridgeDriverConfig {
  const sync = stage.gates.sync;
  const T = stage.periodS;
  let rise = 0, fall = 0;
  if (deadTime !== undefined && is.object('deadTime', deadTime)) {
    fall = is.nonNegative('deadTime.mainOffToSyncOnS', deadTime.mainOffToSyncOnS, 0);
    rise = is.nonNegative('deadTime.syncOffToMainOnS', deadTime.syncOffToMainOnS, 0);
    if (fall >= T) is.add('deadTime.mainOffToSyncOnS', `must be shorter than the switching period ${T} s`, deadTime.mainOffToSyncOnS);
    if (rise >= T) is.add('deadTime.syncOffToMainOnS', `must be shorter than the switching period ${T} s`, deadTime.syncOffToMainOnS);
    if (fall < T && rise < T && rise + fall >= T) is.add('deadTime', `the two dead times together must be shorter than the switching period ${T} s`, deadTime);
    if (sync === undefined && (rise > 0 || fall > 0)) is.add('deadTime', 'applies to synchronous stages only (this stage has a rectifier diode)', deadTime);
  }
  if (lightLoad !== undefined && lightLoad !== 'forced-ccm' && lightLoad !== 'diode-emulation') {
    is.add('lightLoad', "must be 'forced-ccm' or 'diode-emulation'", lightLoad);
  }
  if (sync === undefined && lightLoad === 'forced-ccm') {
    is.add('lightLoad', "'forced-ccm' needs a synchronous stage (a diode cannot carry negative current)", lightLoad);
  }
  return {
    mainGate: stage.gates.main,
    ...(sync !== undefined ? { syncGate: sync } : {}),
    mainOffToSyncOnS: fall,
    syncOffToMainOnS: rise,
    mode: lightLoad ?? (sync === undefined ? 'diode-emulation' : 'forced-ccm'),
    rectifierCurrent: stage.signals.rectifierCurrent,
    inductorCurrent: stage.signals.inductorCurrent,
  };
}

/**
 * Break-before-make gate sequencing of a half bridge from a PWM signal: the rising edge of
 * each gate is delayed by its dead time, falling edges are immediate. In diode emulation a
 * zero-cross detector (a guard on the rectifier current falling through zero) turns the
 * synchronous switch off so the inductor current cannot reverse and the stage enters DCM;
 * in forced CCM the synchronous switch stays on for the whole off-time and the current may
 * go negative. For a diode-rectified stage only the main gate is driven.
 */
export class BridgeDriver {
  private main = -1;
  private sync = -1;
  private zc = -1;
  private iL = -1;
  private pwm = false;
  /** Set when the main switch turns on (for blanking timers), with the context at that instant. */
  onMainOn: ((ctx: ControlContext) => void) | null = null;
  /** Number of zero-cross turn-offs of the synchronous switch. */
  zeroCrossings = 0;
  /** True once the main switch turned on since the last call to {@link takeMainOnFlag}. */
  private mainOnFlag = false;

  constructor(readonly config: BridgeDriverConfig) {}

  /** Call from Controller.start: resolves gates and defines the zero-cross guard. */
  start(ctx: ControlContext): void {
    this.main = ctx.gate(this.config.mainGate);
    if (this.config.syncGate !== undefined) {
      this.sync = ctx.gate(this.config.syncGate);
      if (this.config.mode === 'diode-emulation') {
        this.iL = ctx.signal(this.config.inductorCurrent);
        this.zc = ctx.guard({ signal: this.config.rectifierCurrent, threshold: 0, direction: 'falling' });
      }
    }
    this.pwm = false;
  }

  /** Current PWM level. */
  get pwmHigh(): boolean {
    return this.pwm;
  }

  /** Returns whether the main switch turned on since the last call, and clears the flag. */
  takeMainOnFlag(): boolean {
    const f = this.mainOnFlag;
    this.mainOnFlag = false;
    return f;
  }

  /** PWM rising edge: synchronous switch off now, main switch on after its dead time. */
  rise(ctx: ControlContext): void {
    if (this.pwm) return;
    this.pwm = true;
    ctx.cancel(DRIVER_TAGS.syncOn);
    if (this.sync >= 0) {
      ctx.setGate(this.sync, false);
      if (this.zc >= 0) ctx.disarm(this.zc);
      if (this.config.syncOffToMainOnS > 0) {
        ctx.after(DRIVER_TAGS.mainOn, this.config.syncOffToMainOnS);
        return;
      }
    }
    this.mainOn(ctx);
  }

  /** PWM falling edge: main switch off now, synchronous switch on after its dead time. */
  fall(ctx: ControlContext): void {
    if (!this.pwm) return;
    this.pwm = false;
    ctx.cancel(DRIVER_TAGS.mainOn);
    ctx.setGate(this.main, false);
    if (this.sync < 0) return;
    if (this.config.mainOffToSyncOnS > 0) ctx.after(DRIVER_TAGS.syncOn, this.config.mainOffToSyncOnS);
    else this.syncOn(ctx);
  }

  /** Handles the driver's own tags; returns false for tags that are not its own. */
  handle(ctx: ControlContext, tag: number): boolean {
    switch (tag) {
      case DRIVER_TAGS.mainOn:
        if (this.pwm) this.mainOn(ctx);
        return true;
      case DRIVER_TAGS.syncOn:
        if (!this.pwm) this.syncOn(ctx);
        return true;
      case DRIVER_TAGS.zeroCross:
        ctx.setGate(this.sync, false);
        ctx.disarm(this.zc);
        this.zeroCrossings++;
        return true;
      default:
        return false;
    }
  }

  private mainOn(ctx: ControlContext): void {
    ctx.setGate(this.main, true);
    this.mainOnFlag = true;
    this.onMainOn?.(ctx);
  }

  private syncOn(ctx: ControlContext): void {
    if (this.zc >= 0) {
      // diode emulation: no turn-on once the current has reached zero. The inductor current is
      // read because, with no dead time, the rectifier has not yet taken it at this instant.
      if (ctx.read(this.iL) <= 0) return;
      ctx.arm(this.zc, DRIVER_TAGS.zeroCross);
    }
    ctx.setGate(this.sync, true);
  }
}
