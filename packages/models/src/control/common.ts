import { transferFunctionToStateSpace, type BlockSpec, type ControlContext, type Controller, type GuardSpec, type MeasurementSpec } from '@edgewise/engine';
import type { ControlLaw, Stage } from '../stage.ts';
import { Issues } from '../stages/common.ts';
import { BridgeDriver, DRIVER_TAGS, resolveBridge, type BridgeDriverConfig, type DeadTimeParams, type LightLoadMode } from './dead-time.ts';

// ---------------------------------------------------------------------------------------------
// Options shared by the fixed-frequency control laws

/** Cycle-by-cycle current limit: a guard on a current ends the on-time when it reaches the limit. */
export interface CurrentLimitParams {
  /** Limit, amperes (> 0). */
  readonly amps: number;
  /** Sensed current: the inductor current (default) or the main switch current. */
  readonly sense?: 'inductor' | 'switch';
  /** Leading-edge blanking after the main switch turns on, seconds (default 0). */
  readonly blankingS?: number;
}

/** Options every fixed-frequency law accepts. */
export interface PwmCommonParams {
  /** Break-before-make dead times (synchronous stages only). */
  readonly deadTime?: DeadTimeParams;
  /** Light-load mode of a synchronous stage (default 'forced-ccm'; diode stages behave as 'diode-emulation'). */
  readonly lightLoad?: LightLoadMode;
  /** Cycle-by-cycle current limit. */
  readonly currentLimit?: CurrentLimitParams;
}

/** Reference of a closed voltage loop: a fixed value, an optional soft-start ramp and later steps. */
export interface ReferenceParams {
  /** Reference at the error amplifier, volts (compared with feedbackGain * output voltage). */
  readonly referenceVolts: number;
  /**
   * Soft start: the reference rises linearly from 0 to referenceVolts over this time, seconds
   * (default: no soft start, the reference is at its value from t = 0).
   */
  readonly softStartS?: number;
  /** Later reference changes: the reference steps to `volts` at `atS` (after any soft start). */
  readonly referenceSchedule?: readonly { readonly atS: number; readonly volts: number }[];
  /**
   * Gain from the output voltage to the error amplifier's input (a divider ratio), V/V.
   * Default 1 for buck and boost, -1 for the inverting buck-boost (an inverting sense).
   */
  readonly feedbackGain?: number;
}

/**
 * Analog compensator (error amplifier) acting on e = reference - feedbackGain * output voltage.
 * - `type-ii`: the standard op-amp network with input resistor r1 and feedback (r2 + c1) || c2:
 *   Gc = (1 + s r2 c1) / (s r1 (c1 + c2) (1 + s r2 c1 c2 / (c1 + c2))).
 * - `type-iii`: as type II with the input resistor r1 shunted by r3 + c3:
 *   Gc(type III) = Gc(type II) * (1 + s (r1 + r3) c3) / (1 + s r3 c3).
 * - `poles-zeros`: Gc = (wI / s) * prod(1 + s / wz) / prod(1 + s / wp) with an integrator
 *   (gain wI in rad/s, or a mid-band gain K = wI / wz1 above the first zero), zeros and poles
 *   in hertz (a zero at f means s = -2 pi f; poles must lie in the left half plane: f > 0).
 * - `transfer-function`: num(s)/den(s), descending powers of s (proper; no right-half-plane poles).
 * Component values in ohms and farads. Resistors and capacitors are ideal; the op-amp is ideal,
 * and its output is taken relative to the reference (the reference's DC offset only moves the
 * integrator's operating point).
 */
export type CompensatorParams =
  | { readonly kind: 'type-ii'; readonly r1: number; readonly r2: number; readonly c1: number; readonly c2: number }
  | {
      readonly kind: 'type-iii';
      readonly r1: number;
      readonly r2: number;
      readonly r3: number;
      readonly c1: number;
      readonly c2: number;
      readonly c3: number;
    }
  | {
      readonly kind: 'poles-zeros';
      /** Integrator gain wI, rad/s (give this or midbandGain). */
      readonly integratorRadPerS?: number;
      /** Mid-band gain wI / wz1, V/V (give this or integratorRadPerS). */
      readonly midbandGain?: number;
      readonly zerosHz: readonly number[];
      readonly polesHz: readonly number[];
    }
  | { readonly kind: 'transfer-function'; readonly num: readonly number[]; readonly den: readonly number[] };

/** Counters of a fixed-frequency controller's run. */
export interface PwmStats {
  /** Clock cycles started. */
  cycles: number;
  /** Cycles in which the main switch never turned on (pulse skipped, or zero duty). */
  skippedCycles: number;
  /** Pulses ended by the cycle-by-cycle current limit. */
  currentLimitedPulses: number;
  /** Pulses ended by the maximum duty. */
  maxDutyPulses: number;
  /** Zero-cross turn-offs of the synchronous switch (diode emulation). */
  zeroCrossTurnOffs: number;
}

/** A controller of a fixed-frequency law, exposing its run counters. */
export interface PwmController extends Controller {
  readonly stats: Readonly<PwmStats>;
}

/** A fixed-frequency control law whose controllers expose {@link PwmStats}. */
export interface PwmControlLaw extends ControlLaw {
  readonly createController: () => PwmController;
}

// ---------------------------------------------------------------------------------------------
// Compensator realization

interface Section {
  a: number;
  b: number;
  c: number;
  d: number;
}

/** Series connection of first-order sections as one state space (input -> s1 -> s2 -> ...). */
function cascade(sections: readonly Section[]): { a: number[][]; b: number[][]; c: number[]; d: number[] } {
  const n = sections.length;
  const a = Array.from({ length: n }, () => new Array<number>(n).fill(0));
  const b = Array.from({ length: n }, () => [0]);
  // input of section k as a row over [x; u]
  let rowX = new Array<number>(n).fill(0);
  let rowU = 1;
  sections.forEach((s, k) => {
    for (let j = 0; j < n; j++) a[k]![j] = s.b * rowX[j]!;
    a[k]![k]! += s.a;
    b[k]![0] = s.b * rowU;
    const nx = rowX.map((v) => s.d * v);
    nx[k]! += s.c;
    rowX = nx;
    rowU = s.d * rowU;
  });
  return { a, b, c: rowX, d: [rowU] };
}

/** Are all roots of p (descending powers) strictly in the left half plane? (Routh, 1877; Hurwitz, 1895) */
export function isHurwitz(p: readonly number[]): boolean {
  let q = [...p];
  while (q.length > 0 && q[0] === 0) q.shift();
  if (q.length <= 1) return q.length === 1;
  if (q[0]! < 0) q = q.map((v) => -v);
  if (q.some((v) => !(v > 0))) return false; // necessary condition: all coefficients positive
  let r0 = q.filter((_, i) => i % 2 === 0);
  let r1 = q.filter((_, i) => i % 2 === 1);
  for (let k = 0; k < q.length - 1; k++) {
    if (!(r1[0]! > 0)) return false;
    const next: number[] = [];
    for (let i = 0; i < r0.length - 1; i++) next.push(r0[i + 1]! - (r0[0]! / r1[0]!) * (r1[i + 1] ?? 0));
    r0 = r1;
    r1 = next;
    if (r1.length === 0) break;
  }
  return true;
}

/** A realized compensator: state space on one input, and how to start it at a given output. */
export interface RealizedCompensator {
  readonly stateSpace: { a: number[][]; b: number[][]; c: number[]; d: number[] };
  /** Initial state giving `volts` at the output with zero error, or null when unsupported. */
  readonly initialFor: ((volts: number) => number[]) | null;
}

/**
 * Validates and realizes a compensator. Component and pole-zero forms become a cascade of an
 * integrator and first-order lead/lag sections (states in volts, well scaled); a transfer
 * function becomes the controllable canonical form. Right-half-plane poles are rejected.
 */
export function realizeCompensator(is: Issues, path: string, comp: CompensatorParams | undefined): RealizedCompensator | null {
  if (comp === undefined) {
    is.add(path, 'is required', comp);
    return null;
  }
  if (!is.object(path, comp)) return null;
  const c = comp;
  const leadLag = (wz: number, wp: number): Section => ({ a: -wp, b: wp, c: 1 - wp / wz, d: wp / wz });
  const lowPass = (wp: number): Section => ({ a: -wp, b: wp, c: 1, d: 0 });
  const fromPolesZeros = (wI: number, zeros: number[], poles: number[]): RealizedCompensator => {
    const sections: Section[] = [{ a: 0, b: wI, c: 1, d: 0 }];
    for (let i = 0; i < poles.length; i++) sections.push(i < zeros.length ? leadLag(zeros[i]!, poles[i]!) : lowPass(poles[i]!));
    return { stateSpace: cascade(sections), initialFor: (v) => sections.map(() => v) };
  };
  const TWO_PI = 2 * Math.PI;
  switch (c.kind) {
    case 'type-ii': {
      const r1 = is.positive(`${path}.r1`, c.r1), r2 = is.positive(`${path}.r2`, c.r2);
      const c1 = is.positive(`${path}.c1`, c.c1), c2 = is.positive(`${path}.c2`, c.c2);
      if ([r1, r2, c1, c2].some(Number.isNaN)) return null;
      return fromPolesZeros(1 / (r1 * (c1 + c2)), [1 / (r2 * c1)], [(c1 + c2) / (r2 * c1 * c2)]);
    }
    case 'type-iii': {
      const r1 = is.positive(`${path}.r1`, c.r1), r2 = is.positive(`${path}.r2`, c.r2), r3 = is.positive(`${path}.r3`, c.r3);
      const c1 = is.positive(`${path}.c1`, c.c1), c2 = is.positive(`${path}.c2`, c.c2), c3 = is.positive(`${path}.c3`, c.c3);
      if ([r1, r2, r3, c1, c2, c3].some(Number.isNaN)) return null;
      return fromPolesZeros(
        1 / (r1 * (c1 + c2)),
        [1 / (r2 * c1), 1 / ((r1 + r3) * c3)],
        [(c1 + c2) / (r2 * c1 * c2), 1 / (r3 * c3)],
      );
    }
    case 'poles-zeros': {
      const zs = Array.isArray(c.zerosHz) ? c.zerosHz : null;
      const ps = Array.isArray(c.polesHz) ? c.polesHz : null;
      if (zs === null) is.add(`${path}.zerosHz`, 'must be an array of frequencies in hertz', c.zerosHz);
      if (ps === null) is.add(`${path}.polesHz`, 'must be an array of frequencies in hertz', c.polesHz);
      if (zs === null || ps === null) return null;
      let ok = true;
      zs.forEach((z, i) => {
        if (typeof z !== 'number' || !Number.isFinite(z) || z === 0) {
          is.add(`${path}.zerosHz[${i}]`, 'must be a finite non-zero frequency in hertz (f > 0: zero at s = -2 pi f)', z);
          ok = false;
        }
      });
      ps.forEach((p, i) => {
        if (typeof p !== 'number' || !Number.isFinite(p)) {
          is.add(`${path}.polesHz[${i}]`, 'must be a finite frequency in hertz', p);
          ok = false;
        } else if (p <= 0) {
          is.add(`${path}.polesHz[${i}]`, `a pole at s = ${(-TWO_PI * p).toPrecision(4)} rad/s is not in the left half plane (poles must have f > 0; the integrator is built in)`, p);
          ok = false;
        }
      });
      if (zs.length > ps.length + 1) {
        is.add(`${path}.zerosHz`, `more zeros (${zs.length}) than poles (${ps.length} + the integrator): improper`, zs);
        ok = false;
      } else if (zs.length > ps.length) {
        is.add(`${path}.zerosHz`, `as many zeros as poles including the integrator make a non-strictly-proper amplifier; add a high-frequency pole`, zs);
        ok = false;
      }
      const hasWi = c.integratorRadPerS !== undefined, hasK = c.midbandGain !== undefined;
      if (hasWi === hasK) {
        is.add(path, 'give exactly one of integratorRadPerS and midbandGain', { integratorRadPerS: c.integratorRadPerS, midbandGain: c.midbandGain });
        return null;
      }
      let wI: number;
      if (hasWi) wI = is.finite(`${path}.integratorRadPerS`, c.integratorRadPerS, Number.NaN);
      else {
        if (zs.length === 0) {
          is.add(`${path}.midbandGain`, 'needs at least one zero (it is the gain above the first zero)', c.midbandGain);
          return null;
        }
        wI = is.finite(`${path}.midbandGain`, c.midbandGain, Number.NaN) * TWO_PI * (zs[0] ?? Number.NaN);
      }
      if (!ok || !Number.isFinite(wI)) return null;
      return fromPolesZeros(wI, zs.map((z) => TWO_PI * z), ps.map((p) => TWO_PI * p));
    }
    case 'transfer-function': {
      const num = c.num, den = c.den;
      const bad = (v: unknown): boolean => !Array.isArray(v) || v.length === 0 || !v.every((x) => typeof x === 'number' && Number.isFinite(x));
      if (bad(num)) is.add(`${path}.num`, 'must be a non-empty array of finite coefficients (descending powers of s)', num);
      if (bad(den)) is.add(`${path}.den`, 'must be a non-empty array of finite coefficients (descending powers of s)', den);
      if (bad(num) || bad(den)) return null;
      const d = [...den];
      while (d.length > 0 && d[0] === 0) d.shift();
      if (d.length === 0) {
        is.add(`${path}.den`, 'is zero', den);
        return null;
      }
      // poles at the origin (integrators) are allowed; every other pole must be in the open left half plane
      const core = [...d];
      while (core.length > 1 && core[core.length - 1] === 0) core.pop();
      if (!isHurwitz(core)) {
        is.add(`${path}.den`, 'has poles in the right half plane or on the imaginary axis (other than at s = 0): the compensator itself would be unstable', den);
        return null;
      }
      try {
        return { stateSpace: transferFunctionToStateSpace(num, d), initialFor: null };
      } catch (err) {
        is.add(`${path}.num`, (err as Error).message, num);
        return null;
      }
    }
    default:
      is.add(`${path}.kind`, "must be 'type-ii', 'type-iii', 'poles-zeros' or 'transfer-function'", (c as { kind?: unknown }).kind);
      return null;
  }
}

// ---------------------------------------------------------------------------------------------
// Reference block and voltage loop

/** Block and signal ids of a closed voltage loop. */
export const LOOP_IDS = {
  reference: 'VREF',
  compensator: 'COMP',
  error: 'verr',
} as const;

/** Resolved reference: final value, soft start and schedule. @internal */
export interface ResolvedReference {
  readonly finalVolts: number;
  readonly softStartS: number;
  readonly schedule: readonly { readonly atS: number; readonly volts: number }[];
}

/**
 * Builds the reference block (a ramp with its slope in the state, so the controller can stop it
 * exactly at the end of the soft start: states [value, slope], d value/dt = slope), the error
 * measurement and the compensator block. @internal
 */
export function buildVoltageLoop(
  is: Issues,
  stage: Stage,
  p: ReferenceParams & { readonly compensator: CompensatorParams; readonly initialControlVolts?: number },
): { blocks: BlockSpec[]; measurements: MeasurementSpec[]; reference: ResolvedReference } | null {
  const vref = is.finite('referenceVolts', p.referenceVolts, Number.NaN);
  if (p.referenceVolts === undefined) is.add('referenceVolts', 'is required', p.referenceVolts);
  const ss = p.softStartS === undefined ? 0 : is.positive('softStartS', p.softStartS);
  const H = is.finite('feedbackGain', p.feedbackGain, stage.kind === 'buck-boost' ? -1 : 1);
  if (H === 0) is.add('feedbackGain', 'must be non-zero', p.feedbackGain);
  const schedule: { atS: number; volts: number }[] = [];
  if (p.referenceSchedule !== undefined) {
    if (!Array.isArray(p.referenceSchedule)) is.add('referenceSchedule', 'must be an array of { atS, volts }', p.referenceSchedule);
    else {
      let last = ss;
      p.referenceSchedule.forEach((e, i) => {
        if (!is.object(`referenceSchedule[${i}]`, e)) return;
        if (typeof e.atS !== 'number' || !Number.isFinite(e.atS) || e.atS < last || e.atS <= 0) {
          is.add(`referenceSchedule[${i}].atS`, 'must be a time > 0 s, after the soft start and not earlier than the entry before it', e.atS);
        } else last = e.atS;
        schedule.push({ atS: e.atS, volts: is.finite(`referenceSchedule[${i}].volts`, e.volts, 0) });
      });
    }
  }
  const comp = realizeCompensator(is, 'compensator', p.compensator);
  const v0 = is.finite('initialControlVolts', p.initialControlVolts, Number.NaN);
  if (comp !== null && p.initialControlVolts !== undefined && comp.initialFor === null) {
    is.add('initialControlVolts', "is not supported for a 'transfer-function' compensator (its state is not in volts)", p.initialControlVolts);
  }
  if (comp === null || !Number.isFinite(vref) || Number.isNaN(ss)) return null;
  const ref: BlockSpec = {
    kind: 'linear-block',
    id: LOOP_IDS.reference,
    inputs: [stage.signals.outputVoltage],
    stateSpace: { a: [[0, 1], [0, 0]], b: [[0], [0]], c: [1, 0], d: [0] },
    initial: ss > 0 ? [0, vref / ss] : [vref, 0],
  };
  const err: MeasurementSpec = {
    name: LOOP_IDS.error,
    terms: [{ signal: `${LOOP_IDS.reference}.out`, gain: 1 }, { signal: stage.signals.outputVoltage, gain: -H }],
  };
  const init = comp.initialFor !== null && Number.isFinite(v0) ? comp.initialFor(v0) : undefined;
  const compBlock: BlockSpec = {
    kind: 'linear-block',
    id: LOOP_IDS.compensator,
    inputs: [LOOP_IDS.error],
    stateSpace: comp.stateSpace,
    ...(init !== undefined ? { initial: init } : {}),
  };
  return { blocks: [ref, compBlock], measurements: [err], reference: { finalVolts: vref, softStartS: ss, schedule } };
}

// ---------------------------------------------------------------------------------------------
// The fixed-frequency PWM controller shared by the laws

/** Tags used by the fixed-frequency controller. */
const TAG = {
  clock: 1,
  pulseEnd: 2,
  maxDuty: 3,
  blankEnd: 4,
  comparator: 5,
  currentLimit: 6,
  softStartEnd: 7,
  limitBlankEnd: 8,
  reference: 100,
} as const;

/** Fully resolved settings of a fixed-frequency controller. @internal */
export interface PwmCoreConfig {
  readonly periodS: number;
  readonly bridge: BridgeDriverConfig;
  /** Ramp blocks reset at each clock edge to the given value. */
  readonly rampResets: readonly { readonly block: string; readonly value: number }[];
  /** Open loop: on-time of cycle k, seconds (from the clock edge); null: ended by the comparator. */
  readonly onTimeS: ((cycle: number, timeS: number) => number) | null;
  /** Minimum on-time for open loop: shorter pulses are skipped, seconds. */
  readonly minOnTimeS: number;
  /** Skip the pulse when this signal is below the level at the clock edge. */
  readonly skip: { readonly signal: string; readonly below: number } | null;
  /** Comparator ending the pulse when the combination rises through zero. */
  readonly comparator: GuardSpec | null;
  /** Comparator timing: armed at the clock edge (voltage mode) or at main turn-on + blanking (current mode). */
  readonly comparatorFrom: 'clock' | 'main-on';
  readonly blankingS: number;
  readonly maxDuty: number;
  readonly currentLimit: { readonly signal: string; readonly amps: number; readonly blankingS: number } | null;
  readonly reference: (ResolvedReference & { readonly block: string }) | null;
}

/** Makes a fixed-frequency PWM controller from resolved settings. @internal */
export function createPwmController(cfg: PwmCoreConfig): PwmController {
  const T = cfg.periodS;
  const driver = new BridgeDriver(cfg.bridge);
  const stats: PwmStats = { cycles: 0, skippedCycles: 0, currentLimitedPulses: 0, maxDutyPulses: 0, zeroCrossTurnOffs: 0 };
  let ramps: number[] = [];
  let skipSig = -1;
  let cmpGuard = -1;
  let cmpTerms: { h: number; g: number }[] = [];
  let limGuard = -1, limRead = -1;
  let refBlock = -1;
  let started = false;
  const cmpThreshold = cfg.comparator?.threshold ?? 0;
  const cmpAfterMainOn = cfg.comparator !== null && cfg.comparatorFrom === 'main-on';

  const endPulse = (ctx: ControlContext): void => {
    if (!driver.pwmHigh) return;
    ctx.cancel(TAG.pulseEnd);
    ctx.cancel(TAG.maxDuty);
    ctx.cancel(TAG.blankEnd);
    ctx.cancel(TAG.limitBlankEnd);
    if (cmpGuard >= 0) ctx.disarm(cmpGuard);
    if (limGuard >= 0) ctx.disarm(limGuard);
    driver.fall(ctx);
  };
  /** Arms the comparator; ends the pulse at once if it is already past its threshold. */
  const armComparator = (ctx: ControlContext): void => {
    if (!driver.pwmHigh || cmpGuard < 0) return;
    let v = -cmpThreshold;
    for (const t of cmpTerms) v += t.g * ctx.read(t.h);
    if (v >= 0) endPulse(ctx);
    else ctx.arm(cmpGuard, TAG.comparator);
  };
  const armLimit = (ctx: ControlContext): void => {
    if (!driver.pwmHigh || limGuard < 0) return;
    if (ctx.read(limRead) >= cfg.currentLimit!.amps) {
      stats.currentLimitedPulses++;
      endPulse(ctx);
    } else ctx.arm(limGuard, TAG.currentLimit);
  };
  // Leading-edge blanking: the current comparator and the current limit are armed only after
  // the blanking time from the main switch's turn-on.
  driver.onMainOn = (ctx) => {
    if (cmpAfterMainOn) {
      if (cfg.blankingS > 0) ctx.after(TAG.blankEnd, cfg.blankingS);
      else armComparator(ctx);
    }
    if (cfg.currentLimit !== null && driver.pwmHigh) {
      if (cfg.currentLimit.blankingS > 0) ctx.after(TAG.limitBlankEnd, cfg.currentLimit.blankingS);
      else armLimit(ctx);
    }
  };

  const clock = (ctx: ControlContext): void => {
    const k = ctx.cycle;
    ctx.at(TAG.clock, k + 1, 0);
    if (started) {
      stats.cycles++;
      if (!driver.takeMainOnFlag() && !driver.pwmHigh) stats.skippedCycles++;
    }
    started = true;
    for (let i = 0; i < ramps.length; i++) ctx.setBlockState(ramps[i]!, cfg.rampResets[i]!.value);
    let on = Infinity;
    if (cfg.onTimeS !== null) on = cfg.onTimeS(k, ctx.timeS);
    if (driver.pwmHigh) {
      // the pulse lasted the whole cycle (duty 1, or no comparator trip): it continues
      driver.takeMainOnFlag();
      if (on <= 0 || on < cfg.minOnTimeS) endPulse(ctx);
      else if (on < T) ctx.at(TAG.pulseEnd, k, on);
      else if (cfg.maxDuty < 1) ctx.at(TAG.maxDuty, k, cfg.maxDuty * T);
      if (cfg.comparator !== null && cfg.comparatorFrom === 'clock') armComparator(ctx);
      return;
    }
    if (on <= 0 || on < cfg.minOnTimeS) return;
    if (skipSig >= 0 && ctx.read(skipSig) < cfg.skip!.below) return;
    driver.rise(ctx);
    if (on < T) ctx.at(TAG.pulseEnd, k, on);
    if (cfg.maxDuty < 1) ctx.at(TAG.maxDuty, k, cfg.maxDuty * T);
    if (cfg.comparator !== null && cfg.comparatorFrom === 'clock') armComparator(ctx);
  };

  return {
    stats,
    start(ctx) {
      if (Math.abs(ctx.timeBaseS - T) > 1e-12 * T) {
        throw new RangeError(`run the control law with timeBaseS = ${T} s (the switching period), got ${ctx.timeBaseS} s`);
      }
      started = false;
      driver.start(ctx);
      ramps = cfg.rampResets.map((r) => ctx.block(r.block));
      skipSig = cfg.skip !== null ? ctx.signal(cfg.skip.signal) : -1;
      if (cfg.comparator !== null) {
        cmpGuard = ctx.guard(cfg.comparator);
        const terms = cfg.comparator.terms ?? [{ signal: cfg.comparator.signal!, gain: 1 }];
        cmpTerms = terms.map((t) => ({ h: ctx.signal(t.signal), g: t.gain }));
      }
      if (cfg.currentLimit !== null) {
        limGuard = ctx.guard({ signal: cfg.currentLimit.signal, threshold: cfg.currentLimit.amps, direction: 'rising' });
        limRead = ctx.signal(cfg.currentLimit.signal);
      }
      if (cfg.reference !== null) {
        refBlock = ctx.block(cfg.reference.block);
        const at = (tag: number, tS: number): void => {
          const c = Math.floor(tS / T);
          ctx.at(tag, c, tS - c * T);
        };
        if (cfg.reference.softStartS > 0) at(TAG.softStartEnd, cfg.reference.softStartS);
        cfg.reference.schedule.forEach((e, i) => at(TAG.reference + i, e.atS));
      }
      ctx.at(TAG.clock, 0, 0);
    },
    onEvent(ctx, tag) {
      if (driver.handle(ctx, tag)) {
        if (tag === DRIVER_TAGS.zeroCross) stats.zeroCrossTurnOffs++;
        return;
      }
      switch (tag) {
        case TAG.clock:
          clock(ctx);
          return;
        case TAG.pulseEnd:
        case TAG.comparator:
          endPulse(ctx);
          return;
        case TAG.maxDuty:
          if (driver.pwmHigh) stats.maxDutyPulses++;
          endPulse(ctx);
          return;
        case TAG.currentLimit:
          if (driver.pwmHigh) stats.currentLimitedPulses++;
          endPulse(ctx);
          return;
        case TAG.blankEnd:
          armComparator(ctx);
          return;
        case TAG.limitBlankEnd:
          armLimit(ctx);
          return;
        case TAG.softStartEnd:
          ctx.setBlockState(refBlock, cfg.reference!.finalVolts, 0);
          ctx.setBlockState(refBlock, 0, 1);
          return;
        default:
          if (tag >= TAG.reference && cfg.reference !== null) {
            const e = cfg.reference.schedule[tag - TAG.reference];
            if (e !== undefined) {
              ctx.setBlockState(refBlock, e.volts, 0);
              ctx.setBlockState(refBlock, 0, 1);
            }
          }
      }
    },
  };
}

/** Validates the options shared by fixed-frequency laws. @internal */
export function resolveCommon(
  is: Issues,
  stage: Stage,
  p: PwmCommonParams,
): { bridge: BridgeDriverConfig; currentLimit: PwmCoreConfig['currentLimit'] } {
  const bridge = resolveBridge(is, stage, p.deadTime, p.lightLoad);
  let currentLimit: PwmCoreConfig['currentLimit'] = null;
  if (p.currentLimit !== undefined && is.object('currentLimit', p.currentLimit)) {
    const amps = is.positive('currentLimit.amps', p.currentLimit.amps);
    const sense = p.currentLimit.sense ?? 'inductor';
    if (sense !== 'inductor' && sense !== 'switch') is.add('currentLimit.sense', "must be 'inductor' or 'switch'", p.currentLimit.sense);
    const blank = is.nonNegative('currentLimit.blankingS', p.currentLimit.blankingS, 0);
    if (blank >= stage.periodS) is.add('currentLimit.blankingS', `must be shorter than the switching period ${stage.periodS} s`, blank);
    currentLimit = {
      signal: sense === 'switch' ? stage.signals.mainSwitchCurrent : stage.signals.inductorCurrent,
      amps,
      blankingS: blank,
    };
  }
  return { bridge, currentLimit };
}

/** Validates a maximum duty for a stage (boost and buck-boost need < 1). @internal */
export function resolveMaxDuty(is: Issues, stage: Stage, v: unknown): number {
  const dflt = stage.kind === 'buck' ? 1 : 0.9;
  const d = is.inRange('maxDuty', v, 0, 1, dflt);
  if (v !== undefined && d === 0) is.add('maxDuty', 'must be > 0', v);
  if (stage.kind !== 'buck' && d >= 1) {
    is.add('maxDuty', `must be < 1 for a ${stage.kind} stage (at duty 1 the inductor never delivers energy to the output)`, v);
  }
  return d;
}

/** Checks that a stage looks like a built stage. @internal */
export function checkStage(is: Issues, stage: Stage): boolean {
  const ok = stage !== null && typeof stage === 'object' && typeof stage.periodS === 'number' && stage.periodS > 0 &&
    typeof stage.gates?.main === 'string' && typeof stage.signals?.inductorCurrent === 'string';
  if (!ok) is.add('stage', 'must be a stage made by buildStage (or buildBuck, buildBoost, buildBuckBoost)', stage);
  return ok;
}
