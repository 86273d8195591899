/**
 * The built-in drive of raw circuits: fixed-frequency PWM on a main gate with an optional
 * complementary gate and dead time (break before make), and scheduled duty changes.
 * @module
 */
import type { ControlContext, Controller } from '@edgewise/engine';

/** Settings of {@link createPwmDrive} (SI units). */
export interface PwmDriveSettings {
  /** Switching period, seconds. */
  readonly periodS: number;
  /** Main-gate on-time over the period, 0..1. */
  readonly duty: number;
  readonly main: string;
  readonly complement?: string;
  /** Dead time before and after the complement's on-interval, seconds (default 0). */
  readonly deadTimeS?: number;
  /** Duty changes; each applies from the first cycle starting at or after `atS`. */
  readonly dutySteps?: readonly { readonly atS: number; readonly duty: number }[];
}

const CYCLE = 1;
const MAIN_OFF = 2;
const COMP_ON = 3;
const COMP_OFF = 4;

/**
 * Makes a PWM controller: in cycle k the main gate is on during [kT, kT + D T), the
 * complement during [kT + D T + td, (k + 1) T - td). Edges are scheduled as (cycle, offset),
 * never by summing periods, so long runs do not drift.
 */
export function createPwmDrive(s: PwmDriveSettings): Controller {
  const td = s.deadTimeS ?? 0;
  const steps = [...(s.dutySteps ?? [])].sort((a, b) => a.atS - b.atS);
  let main = -1;
  let comp = -1;
  const dutyAt = (cycle: number): number => {
    let d = s.duty;
    // Same product as the engine's schedule (cycle * period), so a step at a cycle edge applies there.
    const t = cycle * s.periodS;
    for (const st of steps) if (st.atS <= t * (1 + 1e-12)) d = st.duty;
    return d;
  };
  const beginCycle = (ctx: ControlContext, cycle: number): void => {
    const d = dutyAt(cycle);
    const on = d * s.periodS;
    ctx.at(CYCLE, cycle + 1, 0);
    // Break before make: the complement is off before the main gate turns on at the same instant.
    if (comp >= 0) ctx.setGate(comp, false);
    if (on > 0) ctx.setGate(main, true);
    if (d < 1) {
      if (on > 0) ctx.at(MAIN_OFF, cycle, on);
      else ctx.setGate(main, false);
      if (comp >= 0) {
        if (on + td < s.periodS - td) {
          if (on + td > 0) ctx.at(COMP_ON, cycle, on + td);
          else ctx.setGate(comp, true);
          if (td > 0) ctx.at(COMP_OFF, cycle, s.periodS - td);
        }
      }
    }
  };
  return {
    start(ctx) {
      main = ctx.gate(s.main);
      if (s.complement !== undefined) comp = ctx.gate(s.complement);
      beginCycle(ctx, 0);
    },
    onEvent(ctx, tag) {
      switch (tag) {
        case CYCLE:
          beginCycle(ctx, ctx.cycle);
          break;
        case MAIN_OFF:
          ctx.setGate(main, false);
          break;
        case COMP_ON:
          ctx.setGate(comp, true);
          break;
        case COMP_OFF:
          ctx.setGate(comp, false);
          break;
      }
    },
  };
}

/**
 * Wraps a controller so that an event happens at `markS` (a no-op for the circuit) and calls
 * `onMark` there: the summary window then starts exactly at an event instant.
 */
export function withMark(inner: Controller | undefined, markS: number, onMark: () => void, tag = 2 ** 50 + 7): Controller {
  const TAG = tag; // far above the tags controllers use (small counts; the stage schedule uses <= -1e6)
  return {
    start(ctx) {
      inner?.start(ctx);
      if (markS > 0) {
        const k = Math.floor(markS / ctx.timeBaseS);
        ctx.at(TAG, k, markS - k * ctx.timeBaseS);
      } else onMark();
    },
    onEvent(ctx, tag) {
      if (tag === TAG) onMark();
      else inner?.onEvent(ctx, tag);
    },
  };
}
