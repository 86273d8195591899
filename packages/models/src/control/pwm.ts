import type { Stage } from '../stage.ts';
import { Issues } from '../stages/common.ts';
import { checkStage, createPwmController, resolveCommon, type PwmCommonParams, type PwmControlLaw } from './common.ts';

/** Open-loop fixed-frequency PWM. */
export interface OpenLoopPwmParams extends PwmCommonParams {
  /** Constant duty in [0, 1] (give this or dutySchedule). */
  readonly duty?: number;
  /**
   * Duty schedule: duty `duty` from time `atS` on (first entry at 0). A change applies from the
   * first clock edge at or after its time.
   */
  readonly dutySchedule?: readonly { readonly atS: number; readonly duty: number }[];
  /**
   * Pulse skipping: pulses shorter than this are skipped (the main switch stays off for the
   * whole cycle), seconds (default 0: only zero-duty cycles are skipped).
   */
  readonly minOnTimeS?: number;
}

/**
 * Open-loop fixed-frequency PWM: the main switch turns on at each clock edge k * T (scheduled
 * drift free as cycle k + 1, offset 0) and off after duty * T, with break-before-make dead
 * times, diode emulation or forced CCM, pulse skipping and a cycle-by-cycle current limit.
 * Throws {@link ParameterError} naming every invalid parameter.
 */
export function openLoopPwm(stage: Stage, params: OpenLoopPwmParams): PwmControlLaw {
  const is = new Issues('open-loop PWM parameters');
  if (!checkStage(is, stage)) is.done();
  const T = stage.periodS;
  const p = params ?? ({} as OpenLoopPwmParams);
  const { bridge, currentLimit } = resolveCommon(is, stage, p);
  const checkDuty = (path: string, d: unknown): number => {
    const v = is.inRange(path, d, 0, 1, 0);
    if (d === undefined) is.add(path, 'is required', d);
    else if (v === 1 && stage.kind !== 'buck') is.add(path, `must be < 1 for a ${stage.kind} stage (at duty 1 the inductor never delivers energy to the output)`, d);
    return v;
  };
  let schedule: { atS: number; duty: number }[] = [];
  if ((p.duty === undefined) === (p.dutySchedule === undefined)) {
    is.add('duty', 'give exactly one of duty and dutySchedule', { duty: p.duty, dutySchedule: p.dutySchedule });
  } else if (p.duty !== undefined) {
    schedule = [{ atS: 0, duty: checkDuty('duty', p.duty) }];
  } else if (!Array.isArray(p.dutySchedule) || p.dutySchedule.length === 0) {
    is.add('dutySchedule', 'must be a non-empty array of { atS, duty }', p.dutySchedule);
  } else {
    let last = -1;
    p.dutySchedule.forEach((e, i) => {
      if (!is.object(`dutySchedule[${i}]`, e)) return;
      if (typeof e.atS !== 'number' || !Number.isFinite(e.atS) || e.atS < 0 || e.atS <= last) {
        is.add(`dutySchedule[${i}].atS`, 'must be a time >= 0 s, later than the entry before it', e.atS);
      } else last = e.atS;
      if (i === 0 && e.atS !== 0) is.add('dutySchedule[0].atS', 'the first entry must start at 0 s', e.atS);
      schedule.push({ atS: e.atS, duty: checkDuty(`dutySchedule[${i}].duty`, e.duty) });
    });
  }
  const minOn = is.nonNegative('minOnTimeS', p.minOnTimeS, 0);
  if (minOn >= T) is.add('minOnTimeS', `must be shorter than the switching period ${T} s`, p.minOnTimeS);
  is.done();

  // cycle index from which each schedule entry applies: the first clock edge at or after atS
  const fromCycle = schedule.map((e) => Math.ceil(e.atS / T - 1e-9));
  const onTimeS = (cycle: number): number => {
    let d = schedule[0]!.duty;
    for (let i = 1; i < schedule.length; i++) if (cycle >= fromCycle[i]!) d = schedule[i]!.duty;
    return d >= 1 ? Infinity : d * T;
  };
  return {
    blocks: [],
    measurements: [],
    timeBaseS: T,
    createController: () =>
      createPwmController({
        periodS: T,
        bridge,
        rampResets: [],
        onTimeS,
        minOnTimeS: minOn,
        skip: null,
        comparator: null,
        comparatorFrom: 'clock',
        blankingS: 0,
        maxDuty: 1,
        currentLimit,
        reference: null,
      }),
  };
}
