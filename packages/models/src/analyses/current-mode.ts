/**
 * Small-signal model of peak current-mode control (Ridley, 1991, "A new, continuous-time model
 * for current-mode control", IEEE Trans. Power Electronics 6(2)).
 *
 * The power stage is the CCM averaged model of the same circuit (Middlebrook and Cuk 1976). The
 * modulator closes the current loop: d = Fm (vc - Ri He(s) iL + kf vg + kr v), with
 * Fm = 1 / ((Sn + Se) Ts), Sn = Ri m1 the sensed on-slope, Se the compensation ramp slope, and
 * the sampling gain He(s) ~ 1 + s / (wn Qz) + s^2 / wn^2, wn = pi / Ts, Qz = -2 / pi, which
 * places a double pole at half the switching frequency with Qp = 1 / (pi (mc D' - 0.5)),
 * mc = 1 + Se / Sn. The feedforward (kf, from the input) and feedback (kr, from the output)
 * gains are Ridley's for the buck and the boost: buck kf = -(D Ts Ri / L)(1 - D/2),
 * kr = Ts Ri / (2L); boost kf = -Ts Ri / (2L), kr = D'^2 Ts Ri / (2L). They follow at DC from
 * the triangle's peak-to-average relation Ri <iL> = vc - Se d Ts - Ri m1 d Ts / 2 perturbed,
 * with Sn Ts d / 2 rewritten by the volt-second balance (buck v = D vg, boost v D' = vg), which
 * moves the modulator gain from 1 / ((Se + Sn/2) Ts) to Ridley's Fm.
 */
import type { CircuitModel } from '@edgewise/engine';
import { ccmAveragedModel, topologyKeyOf, type CcmAveragedModel, type TransferFunction } from './averaging.ts';
import { modelOf, type SwitchingSystem } from './trace.ts';

/** Options of {@link peakCurrentModel}. */
export interface PeakCurrentModelOptions {
  /** Converter: selects Ridley's feedforward and feedback gains kf and kr. */
  readonly converter: 'buck' | 'boost';
  /** Devices conducting during the on-time, e.g. ["Q1"]. */
  readonly on: readonly string[];
  /** Devices conducting during the off-time, e.g. ["D1"]. */
  readonly off: readonly string[];
  /** Switching period Ts, seconds. */
  readonly periodS: number;
  /** Inductor current state whose peak is controlled, e.g. "L1.current". */
  readonly inductor: string;
  /** Input voltage source, whose perturbation enters the modulator through kf (default "VIN"). */
  readonly input?: string;
  /** Output capacitor state fed back through kr (default: the circuit's only capacitor, else required), e.g. "C1.charge". */
  readonly capacitor?: string;
  /** Current-sense gain Ri, volts per ampere (default 1: the command is in amperes). */
  readonly senseGain?: number;
  /** Compensation ramp slope Se, volts per second in the sense signal's unit (default 0). */
  readonly rampSlope?: number;
  /**
   * The control voltage vc at the operating point, volts: a number, or the id of the
   * independent source that carries it (its value at t = 0). The duty follows from the peak of
   * the current triangle: Ri (I + m1 D Ts / 2) + Se D Ts = vc.
   */
  readonly command: number | string;
}

/** Ridley's model at an operating point. */
export interface PeakCurrentModel {
  /** Duty at the operating point. */
  readonly duty: number;
  /** The CCM averaged power stage at that duty. */
  readonly stage: CcmAveragedModel;
  /** Modulator gain Fm = 1 / ((Sn + Se) Ts), per volt. */
  readonly fm: number;
  /** Sensed on-slope Sn and off-slope Sf (magnitude), volts per second. */
  readonly sn: number;
  readonly sf: number;
  /** mc = 1 + Se / Sn. */
  readonly mc: number;
  /** Quality factor of the double pole at fs/2, 1 / (pi (mc D' - 0.5)). */
  readonly qp: number;
  /** Feedforward and feedback gains of Ridley's model. */
  readonly kf: number;
  readonly kr: number;
  /** Sampling gain He(s) = 1 + s / (wn Qz) + s^2 / wn^2. */
  readonly samplingGain: TransferFunction;
  /** Control voltage vc -> signal. */
  controlToOutput(signal: string): TransferFunction;
  /**
   * Independent source -> signal with the current loop closed (vc held): line-to-output from
   * the input source (through kf), output impedance from a current source at the output.
   */
  inputToOutput(source: string, signal: string): TransferFunction;
}

const mul = (a: { re: number; im: number }, b: { re: number; im: number }) => ({ re: a.re * b.re - a.im * b.im, im: a.re * b.im + a.im * b.re });
const div = (a: { re: number; im: number }, b: { re: number; im: number }) => {
  const d = b.re * b.re + b.im * b.im;
  return { re: (a.re * b.re + a.im * b.im) / d, im: (a.im * b.re - a.re * b.im) / d };
};

/**
 * Builds Ridley's peak current-mode model of a buck or boost from its circuit. Throws a
 * RangeError naming the option for bad input, and an Error when no CCM duty in (0, 1) meets the
 * command.
 */
export function peakCurrentModel(circuit: SwitchingSystem['circuit'], options: PeakCurrentModelOptions): PeakCurrentModel {
  const model: CircuitModel = modelOf({ circuit, createController: () => ({ start() {}, onEvent() {} }), timeBaseS: 1 });
  const o = options;
  if (o?.converter !== 'buck' && o?.converter !== 'boost') throw new RangeError(`converter must be "buck" or "boost", got ${JSON.stringify(o?.converter)}`);
  const Ts = o.periodS;
  if (!(Ts > 0 && Number.isFinite(Ts))) throw new RangeError(`periodS must be a time > 0 s, got ${String(Ts)}`);
  const Ri = o.senseGain ?? 1;
  if (!(Ri > 0 && Number.isFinite(Ri))) throw new RangeError(`senseGain must be > 0 V/A, got ${String(Ri)}`);
  const Se = o.rampSlope ?? 0;
  if (!(Se >= 0 && Number.isFinite(Se))) throw new RangeError(`rampSlope must be >= 0 V/s, got ${String(Se)}`);
  const c = model.circuit;
  const iLfull = c.stateNames.indexOf(o.inductor);
  const lEl = c.spec.elements.find((e) => `${e.id}.current` === o.inductor);
  if (iLfull < 0 || lEl?.kind !== 'inductor') throw new RangeError(`inductor: "${o.inductor}" is not an inductor current state; states: ${c.stateNames.join(', ')}`);
  let vc: number;
  if (typeof o.command === 'string') {
    const u = c.inputNames.indexOf(o.command);
    if (u <= 0) throw new RangeError(`command: unknown independent source "${o.command}"; sources: ${c.inputNames.slice(1).join(', ')}`);
    vc = c.initialState[c.nx + u]!;
  } else vc = o.command;
  if (!Number.isFinite(vc)) throw new RangeError(`command must be a finite voltage, got ${String(vc)}`);
  const L = lEl.henries;
  const t1 = model.topology(topologyKeyOf(model, o.on));
  const t2 = model.topology(topologyKeyOf(model, o.off));
  const n = c.nx + c.nu;

  /** Slopes of the inductor current in both intervals at the averaged operating point of duty d. */
  const at = (d: number): { stage: CcmAveragedModel; m1: number; m2: number; peak: number } => {
    const stage = ccmAveragedModel(model, { on: o.on, off: o.off, duty: d, periodS: Ts });
    const w = new Float64Array(c.initialState);
    stage.stateNames.forEach((nm, i) => (w[c.stateNames.indexOf(nm)] = stage.dcState[i]!));
    let m1 = 0, m2 = 0;
    for (let j = 0; j < n; j++) {
      m1 += t1.m[iLfull * n + j]! * w[j]!;
      m2 += t2.m[iLfull * n + j]! * w[j]!;
    }
    const I = stage.dcState[stage.stateNames.indexOf(o.inductor)]!;
    return { stage, m1, m2: -m2, peak: Ri * (I + (m1 * d * Ts) / 2) + Se * d * Ts };
  };
  // bisection on the duty: the sensed peak plus ramp rises with d in CCM
  let lo = 1e-6, hi = 1 - 1e-6;
  const fLo = at(lo).peak - vc, fHi = at(hi).peak - vc;
  if (!(fLo < 0 && fHi > 0)) throw new Error(`no duty in (0, 1) meets the command ${vc} V (sensed peak plus ramp spans ${(fLo + vc).toPrecision(4)} .. ${(fHi + vc).toPrecision(4)} V)`);
  for (let k = 0; k < 80; k++) {
    const mid = (lo + hi) / 2;
    if (at(mid).peak - vc < 0) lo = mid;
    else hi = mid;
  }
  const D = (lo + hi) / 2;
  const op = at(D);
  const valley = op.stage.dcState[op.stage.stateNames.indexOf(o.inductor)]! - (op.m1 * D * Ts) / 2;
  if (!(valley > 0)) throw new Error(`the operating point is not in CCM (valley current ${valley.toPrecision(4)} A): Ridley's model assumes CCM`);
  const Dp = 1 - D;
  const sn = Ri * op.m1, sf = Ri * op.m2;
  const fm = 1 / ((sn + Se) * Ts);
  const mc = 1 + Se / sn;
  const qp = 1 / (Math.PI * (mc * Dp - 0.5));
  // Ridley 1991, feedforward and feedback gains (re-derived at DC as in the header)
  const kf = o.converter === 'buck' ? -((D * Ts * Ri) / L) * (1 - D / 2) : -(Ts * Ri) / (2 * L);
  const kr = o.converter === 'buck' ? (Ts * Ri) / (2 * L) : (Dp * Dp * Ts * Ri) / (2 * L);
  const wn = Math.PI / Ts, qz = -2 / Math.PI;
  const He: TransferFunction = (s) => {
    const s2 = mul(s, s);
    return { re: 1 + s.re / (wn * qz) + s2.re / (wn * wn), im: s.im / (wn * qz) + s2.im / (wn * wn) };
  };
  const caps = c.spec.elements.filter((e) => e.kind === 'capacitor').map((e) => `${e.id}.charge`);
  const vOut = o.capacitor ?? (caps.length === 1 ? caps[0]! : null);
  if (vOut === null && caps.length > 1) throw new RangeError(`capacitor: name the output capacitor state; capacitors: ${caps.join(', ')}`);
  if (vOut !== null && !caps.includes(vOut)) throw new RangeError(`capacitor: "${vOut}" is not a capacitor state; capacitors: ${caps.join(', ') || '(none)'}`);
  const inputId = o.input ?? 'VIN';
  if (c.inputNames.indexOf(inputId) <= 0) throw new RangeError(`input: unknown independent source "${inputId}"; sources: ${c.inputNames.slice(1).join(', ')}`);
  const gid = op.stage.controlToOutput(o.inductor);
  const gvd = vOut === null ? null : op.stage.controlToOutput(vOut);
  /** 1 + Fm (Ri He Gid - kr Gvd): the return difference of the current loop. */
  const returnDiff = (s: { re: number; im: number }): { re: number; im: number } => {
    let loop = mul({ re: Ri, im: 0 }, mul(He(s), gid(s)));
    if (gvd !== null) {
      const g = gvd(s);
      loop = { re: loop.re - kr * g.re, im: loop.im - kr * g.im };
    }
    return { re: 1 + fm * loop.re, im: fm * loop.im };
  };
  return {
    duty: D, stage: op.stage, fm, sn, sf, mc, qp, kf, kr, samplingGain: He,
    inputToOutput(source, sig) {
      const gys = op.stage.inputToOutput(source, sig);
      const gyd = op.stage.controlToOutput(sig);
      const gis = op.stage.inputToOutput(source, o.inductor);
      const gvs = vOut === null ? null : op.stage.inputToOutput(source, vOut);
      const ff = source === inputId ? kf : 0;
      return (s) => {
        // d = Fm (-Ri He i + kf vg + kr v) with i, v driven by the source and by d
        let num = mul({ re: -Ri, im: 0 }, mul(He(s), gis(s)));
        num = { re: num.re + ff, im: num.im };
        if (gvs !== null) {
          const g = gvs(s);
          num = { re: num.re + kr * g.re, im: num.im + kr * g.im };
        }
        const dps = div({ re: fm * num.re, im: fm * num.im }, returnDiff(s));
        const y = gys(s), yd = mul(gyd(s), dps);
        return { re: y.re + yd.re, im: y.im + yd.im };
      };
    },
    controlToOutput(sig) {
      const gyd = op.stage.controlToOutput(sig);
      // d = Fm (vc - Ri He iL + kr v): d / vc = Fm / (1 + Fm (Ri He Gid - kr Gvd))
      return (s) => mul(gyd(s), div({ re: fm, im: 0 }, returnDiff(s)));
    },
  };
}
