/**
 * Loss breakdown of a run: conduction losses per element part from exact integrals of the run
 * itself, and switching losses accounted per transition from the scenario's switching-loss
 * data (models' `LossAccountant`; not fed back into the circuit).
 * @module
 */
import type { CircuitModel, IntegralSpec } from '@edgewise/engine';
import { conductionTerms as modelTerms, LossAccountant, ParameterError, switchingPowers, type ConductionPart, type SwitchingEnergy, type SwitchingLoss, type SwitchingLossModels } from '@edgewise/models';
import { InputError } from '../errors.ts';
import type { SwitchingLossSpec } from '../scenario/schema.ts';

/** Where a conduction loss is dissipated. */
export type LossPart = ConductionPart;

/** One conduction-loss integral: scale times the integral of `of` times `times`. */
export interface ConductionTerm {
  readonly element: string;
  readonly part: LossPart;
  readonly scale: number;
  readonly integral: IntegralSpec;
}

/** Conduction terms of every dissipating part except the loads (ids in `exclude`), with their integrals. */
export function conductionTerms(model: CircuitModel, exclude: ReadonlySet<string>): ConductionTerm[] {
  return modelTerms(model.circuit.spec, exclude, { sourceResistance: true }).map((t) => ({
    element: t.element, part: t.part, scale: t.scale, integral: { name: `loss:${t.element}:${t.part}`, of: t.of, times: t.times },
  }));
}

/** The models' switching-loss data from the scenario's (SI numbers). */
export function switchingLossModels(spec: SwitchingLossSpec): SwitchingLossModels {
  const switches: Record<string, NonNullable<SwitchingLossModels['switches']>[string]> = {};
  for (const [id, s] of Object.entries(spec.switches ?? {})) {
    const t = s.transitions;
    switches[id] = {
      ...(t === undefined ? {} : t.kind === 'linear-overlap'
        ? { transitions: { kind: 'linear-overlap', riseS: t.rise, fallS: t.fall } }
        : { transitions: { kind: 'energy-table', currentsA: t.currents, volts: t.volts, turnOnJ: t.turnOn, turnOffJ: t.turnOff, ...(t.extrapolation !== undefined ? { extrapolation: t.extrapolation } : {}) } }),
      ...(s.outputCapacitance !== undefined ? { outputCapacitanceF: s.outputCapacitance } : {}),
      ...(s.gate !== undefined ? { gate: { chargeC: s.gate.charge, driveVolts: s.gate.driveVolts } } : {}),
      ...(s.bodyDiodeRecoveredCharge !== undefined ? { bodyDiodeRecoveredChargeC: s.bodyDiodeRecoveredCharge } : {}),
    };
  }
  const diodes: Record<string, { recoveredChargeC: number }> = {};
  for (const [id, d] of Object.entries(spec.diodes ?? {})) diodes[id] = { recoveredChargeC: d.recoveredCharge };
  return { switches, diodes };
}

const FIELD: Record<string, string> = {
  currentsA: 'currents', turnOnJ: 'turnOn', turnOffJ: 'turnOff', riseS: 'rise', fallS: 'fall',
  outputCapacitanceF: 'outputCapacitance', chargeC: 'charge', bodyDiodeRecoveredChargeC: 'bodyDiodeRecoveredCharge', recoveredChargeC: 'recoveredCharge',
};

/** A loss accountant for a run; InputError naming `switchingLosses.*` on bad data or unknown ids. */
export function makeAccountant(model: CircuitModel, spec: SwitchingLossSpec, window: { fromS?: number; toS?: number }, where: string): LossAccountant {
  try {
    return new LossAccountant(model, switchingLossModels(spec), window);
  } catch (err) {
    // The models name fields with unit suffixes; the scenario carries units in its values.
    const rename = (path: string): string =>
      `switchingLosses.${path.split('.').map((seg) => seg.replace(/^[^[]+/, (name) => FIELD[name] ?? name)).join('.')}`;
    if (err instanceof ParameterError) throw new InputError(where, err.issues.map((i) => `${rename(i.path)}: ${i.message}`));
    const msg = (err as Error).message.replace(/^invalid switching-loss models: /, '');
    throw new InputError(where, msg.split('; ').map((m) => `switchingLosses.${m}`));
  }
}

/** Switching losses of a window in the summary: watts per device with transition counts. */
/** Switching losses of one device over a window, watts (the models' type). */
export type SwitchingLossJson = SwitchingLoss;

/** Energies over a window of `spanS` seconds as average powers (devices without any loss left out). */
export function switchingWatts(energies: readonly SwitchingEnergy[], spanS: number): SwitchingLossJson[] {
  return switchingPowers(energies.filter((e) => e.totalJ > 0), spanS);
}
