import type { CircuitModel, TraceListener } from '@edgewise/engine';
import {
  interpolateEnergyJ,
  validateSwitchingLossModels,
  type SwitchingLossModels,
  type TransitionModel,
} from './switching.ts';

/** Kinds of switching energy, in the order of {@link SwitchingEnergy}'s fields. */
const ON = 0, OFF = 1, COSS = 2, RR = 3, GATE = 4, KINDS = 5;

/** Switching energy of one device accumulated over a window, joules, with transition counts. */
export interface SwitchingEnergy {
  /** Device id: a switch element id, a diode element id, or `<switch>.body` for a body diode. */
  readonly device: string;
  readonly turnOnJ: number;
  readonly turnOffJ: number;
  readonly outputCapacitanceJ: number;
  readonly reverseRecoveryJ: number;
  readonly gateDriveJ: number;
  readonly totalJ: number;
  readonly turnOns: number;
  readonly turnOffs: number;
  /** Times the diode was forced off while conducting (reverse recoveries). */
  readonly recoveries: number;
}

interface DeviceModel {
  readonly index: number;
  readonly id: string;
  readonly channel: boolean;
  readonly transitions: TransitionModel | undefined;
  readonly cossF: number;
  readonly gateJ: number;
  readonly qrrC: number;
}

/**
 * Accounts switching losses while a run goes, as a {@link TraceListener}: at every topology
 * change it takes, for each device that changed state, the commutated current and the blocked
 * voltage from the topologies before and after the event (device current and voltage rows
 * dotted with the state then), and adds
 * - turn-on of a channel: E_on(I after, V before) (linear overlap 0.5 V I tr, or the table),
 *   0.5 Coss V^2 and the gate drive energy Qg Vdrive;
 * - turn-off of a channel: E_off(I before, V after) (0.5 V I tf, or the table);
 * - a conducting diode or body diode forced off by a channel turning on at the same instant:
 *   Qrr V, V the reverse voltage after the event (a diode that stops at zero current, as in
 *   DCM, recovers nothing).
 * Negative blocked voltages count as zero (a channel that turns on while its body diode
 * conducts switches at zero voltage). These energies are accounted only: the circuit does
 * not see them. With zero dead time between the two switches of a synchronous pair, the
 * switch turning on sees the full voltage in the topology before the event and is counted as
 * hard-switched; give a dead time for realistic accounting.
 */
export class LossAccountant implements TraceListener {
  private readonly devices: DeviceModel[];
  private readonly acc: Float64Array;
  private readonly counts: Int32Array; // per device: turn-ons, turn-offs, recoveries
  private readonly channelMask: number;
  private readonly fromS: number;
  private readonly toS: number;

  /**
   * @param model the compiled circuit the run uses (its topologies give the device rows).
   * @param models loss data by element id (validated here; unknown ids are an error).
   * @param window accounting window [fromS, toS), seconds (default: the whole run).
   */
  constructor(
    private readonly model: CircuitModel,
    models: SwitchingLossModels,
    window: { readonly fromS?: number; readonly toS?: number } = {},
  ) {
    validateSwitchingLossModels(models);
    const c = model.circuit;
    const switchIds = new Set(c.devices.filter((d) => d.kind === 'channel').map((d) => d.element));
    const diodeIds = new Set(c.devices.filter((d) => d.kind === 'diode' && d.id === d.element).map((d) => d.id));
    const unknown = [
      ...Object.keys(models.switches ?? {}).filter((id) => !switchIds.has(id)).map((id) => `switches.${id}: no switch "${id}" in the circuit`),
      ...Object.keys(models.diodes ?? {}).filter((id) => !diodeIds.has(id)).map((id) => `diodes.${id}: no diode "${id}" in the circuit`),
    ];
    if (unknown.length > 0) throw new RangeError(`invalid switching-loss models: ${unknown.join('; ')}`);
    let mask = 0;
    this.devices = c.devices.map((d, index) => {
      const sw = models.switches?.[d.element];
      if (d.kind === 'channel') {
        mask |= 1 << index;
        return {
          index, id: d.id, channel: true, transitions: sw?.transitions,
          cossF: sw?.outputCapacitanceF ?? 0,
          gateJ: sw?.gate ? sw.gate.chargeC * sw.gate.driveVolts : 0,
          qrrC: 0,
        };
      }
      const qrr = d.id === d.element ? (models.diodes?.[d.id]?.recoveredChargeC ?? 0) : (sw?.bodyDiodeRecoveredChargeC ?? 0);
      return { index, id: d.id, channel: false, transitions: undefined, cossF: 0, gateJ: 0, qrrC: qrr };
    });
    this.channelMask = mask;
    this.acc = new Float64Array(this.devices.length * KINDS);
    this.counts = new Int32Array(this.devices.length * 3);
    this.fromS = window.fromS ?? -Infinity;
    this.toS = window.toS ?? Infinity;
  }

  /** Clears the accumulated energies. */
  reset(): void {
    this.acc.fill(0);
    this.counts.fill(0);
  }

  /** TraceListener hook: called by the engine at every topology change. */
  switched(timeS: number, before: number, after: number, w: Float64Array): void {
    if (timeS < this.fromS || timeS >= this.toS) return;
    const changed = before ^ after;
    if (changed === 0) return;
    const tb = this.model.topology(before);
    const ta = this.model.topology(after);
    const forcing = ~before & after & this.channelMask;
    for (let d = 0; d < this.devices.length; d++) {
      if (((changed >>> d) & 1) === 0) continue;
      const dev = this.devices[d]!;
      const o = d * KINDS;
      const wasOn = ((before >>> d) & 1) === 1;
      if (dev.channel) {
        if (!wasOn) {
          const v = dot(tb.deviceVoltage[d]!, w);
          const vb = v > 0 ? v : 0;
          const i = Math.abs(dot(ta.deviceCurrent[d]!, w));
          this.acc[o + ON]! += turnOnJ(dev.transitions, vb, i);
          this.acc[o + COSS]! += 0.5 * dev.cossF * vb * vb;
          this.acc[o + GATE]! += dev.gateJ;
          this.counts[3 * d]!++;
        } else {
          const v = dot(ta.deviceVoltage[d]!, w);
          const i = Math.abs(dot(tb.deviceCurrent[d]!, w));
          this.acc[o + OFF]! += turnOffJ(dev.transitions, v > 0 ? v : 0, i);
          this.counts[3 * d + 1]!++;
        }
      } else if (wasOn && forcing !== 0 && dot(tb.deviceCurrent[d]!, w) > 0) {
        // reverse voltage after the event: the diode's own voltage (anode - cathode) is negative
        // (a channel closing in parallel takes the current over at a forward voltage: no recovery)
        const vr = -dot(ta.deviceVoltage[d]!, w);
        if (vr > 0) {
          this.acc[o + RR]! += dev.qrrC * vr;
          this.counts[3 * d + 2]!++;
        }
      }
    }
  }

  /** Energies per device, joules (devices with no loss data and no events are included with zeros). */
  energies(): SwitchingEnergy[] {
    return this.devices.map((dev, d) => {
      const o = d * KINDS;
      const a = this.acc;
      return {
        device: dev.id,
        turnOnJ: a[o + ON]!,
        turnOffJ: a[o + OFF]!,
        outputCapacitanceJ: a[o + COSS]!,
        reverseRecoveryJ: a[o + RR]!,
        gateDriveJ: a[o + GATE]!,
        totalJ: a[o + ON]! + a[o + OFF]! + a[o + COSS]! + a[o + RR]! + a[o + GATE]!,
        turnOns: this.counts[3 * d]!,
        turnOffs: this.counts[3 * d + 1]!,
        recoveries: this.counts[3 * d + 2]!,
      };
    });
  }
}

function dot(r: Float64Array, w: Float64Array): number {
  let s = 0;
  for (let j = 0; j < r.length; j++) s += r[j]! * w[j]!;
  return s;
}

function turnOnJ(m: TransitionModel | undefined, v: number, i: number): number {
  if (m === undefined) return 0;
  if (m.kind === 'linear-overlap') return 0.5 * v * i * m.riseS;
  return interpolateEnergyJ(m.currentsA, m.volts, m.turnOnJ, i, v, m.extrapolation ?? 'linear');
}

function turnOffJ(m: TransitionModel | undefined, v: number, i: number): number {
  if (m === undefined) return 0;
  if (m.kind === 'linear-overlap') return 0.5 * v * i * m.fallS;
  return interpolateEnergyJ(m.currentsA, m.volts, m.turnOffJ, i, v, m.extrapolation ?? 'linear');
}
