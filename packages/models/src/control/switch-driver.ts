import type { ControlContext } from '@edgewise/engine';
import type { Stage } from '../stage.ts';
import type { Issues } from '../stages/common.ts';

/** Options shared by the control laws for driving the switches of a stage. */
export interface DriveOptions {
  /**
   * Break-before-make dead time between the two gates of a synchronous stage, seconds
   * (default 0). Ignored for diode-rectified stages.
   */
  readonly deadTimeS?: number;
  /**
   * Diode emulation for synchronous stages (default true): the synchronous switch turns off
   * when the inductor current falls to zero, so the stage enters DCM at light load. When
   * false the synchronous switch stays on for the whole off-time (forced CCM).
   */
  readonly diodeEmulation?: boolean;
}

/** Validates {@link DriveOptions} into `issues`. */
export function checkDriveOptions(issues: Issues, o: DriveOptions): void {
  issues.nonNegative('deadTimeS', o.deadTimeS, 0);
  if (o.diodeEmulation !== undefined && typeof o.diodeEmulation !== 'boolean') {
    issues.add('diodeEmulation', 'must be a boolean', o.diodeEmulation);
  }
}

/** Timer and guard tags reserved by the driver (laws use small non-negative tags). */
export const DRIVER_TAG_MAIN_ON = 1001;
export const DRIVER_TAG_SYNC_ON = 1002;
export const DRIVER_TAG_ZERO_CURRENT = 1003;

/**
 * Drives the main and (for synchronous stages) the synchronous gate of a stage: the
 * synchronous gate is complementary to the main gate with break-before-make dead times, and
 * with diode emulation it opens when the inductor current reaches zero (located exactly by a
 * guard). A driver holds run state: make one per controller run. Nothing here allocates after
 * `start`.
 */
export class SwitchDriver {
  private mainGate = -1;
  private syncGate = -1;
  private iL = -1;
  private zeroGuard = -1;
  private readonly deadS: number;
  private readonly emulate: boolean;
  private readonly hasSync: boolean;
  /** Logical state requested by the law (true from requestOn until requestOff). */
  on = false;

  constructor(private readonly stage: Stage, options: DriveOptions) {
    this.deadS = options.deadTimeS ?? 0;
    this.emulate = options.diodeEmulation ?? true;
    this.hasSync = stage.rectification === 'synchronous' && stage.gates.sync !== undefined;
  }

  /** Gets handles and defines the zero-current guard; call from Controller.start. */
  start(ctx: ControlContext): void {
    this.mainGate = ctx.gate(this.stage.gates.main);
    this.iL = ctx.signal(this.stage.signals.inductorCurrent);
    if (this.hasSync) {
      this.syncGate = ctx.gate(this.stage.gates.sync!);
      if (this.emulate) {
        this.zeroGuard = ctx.guard({ signal: this.stage.signals.inductorCurrent, threshold: 0, direction: 'falling' });
      }
    }
    this.on = false;
  }

  /** Handle of the inductor-current signal (for laws that need it). */
  get inductorCurrentHandle(): number {
    return this.iL;
  }

  /**
   * Starts an on-interval. Returns the delay until the main switch actually conducts,
   * seconds (the dead time when the synchronous switch had to be opened first, else 0).
   */
  requestOn(ctx: ControlContext): number {
    this.on = true;
    ctx.cancel(DRIVER_TAG_SYNC_ON);
    if (this.syncGate >= 0 && ctx.isGateOn(this.syncGate)) {
      ctx.setGate(this.syncGate, false);
      if (this.zeroGuard >= 0) ctx.disarm(this.zeroGuard);
      if (this.deadS > 0) {
        ctx.after(DRIVER_TAG_MAIN_ON, this.deadS);
        return this.deadS;
      }
    }
    ctx.setGate(this.mainGate, true);
    return 0;
  }

  /** Ends an on-interval: the main switch opens now, the synchronous one closes after the dead time. */
  requestOff(ctx: ControlContext): void {
    this.on = false;
    ctx.cancel(DRIVER_TAG_MAIN_ON);
    if (this.syncGate < 0) {
      ctx.setGate(this.mainGate, false);
      return;
    }
    if (this.deadS > 0) {
      ctx.setGate(this.mainGate, false);
      ctx.after(DRIVER_TAG_SYNC_ON, this.deadS);
    } else {
      // read before any gate change: reads use the topology in force before the event
      const i = ctx.read(this.iL);
      ctx.setGate(this.mainGate, false);
      this.syncOn(ctx, i);
    }
  }

  private syncOn(ctx: ControlContext, inductorAmps: number): void {
    // with diode emulation a current already at zero (DCM) leaves the synchronous switch off
    if (this.emulate && inductorAmps <= 0) return;
    ctx.setGate(this.syncGate, true);
    if (this.zeroGuard >= 0) ctx.arm(this.zeroGuard, DRIVER_TAG_ZERO_CURRENT);
  }

  /** Handles the driver's own events; returns false for tags that are not the driver's. */
  onEvent(ctx: ControlContext, tag: number): boolean {
    switch (tag) {
      case DRIVER_TAG_MAIN_ON:
        ctx.setGate(this.mainGate, true);
        return true;
      case DRIVER_TAG_SYNC_ON:
        if (!this.on) this.syncOn(ctx, ctx.read(this.iL));
        return true;
      case DRIVER_TAG_ZERO_CURRENT:
        ctx.disarm(this.zeroGuard);
        ctx.setGate(this.syncGate, false);
        return true;
      default:
        return false;
    }
  }
}
