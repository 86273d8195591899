import { Issues } from '../stages/common.ts';

/**
 * How a controlled switch dissipates energy in its transitions. The engine's transitions are
 * instantaneous, so these energies are accounted per transition from the commutated current
 * and the blocked voltage; they are not fed back into the circuit.
 */
export type TransitionModel =
  | {
      /**
       * Linear current-voltage overlap: a turn-on costs 0.5 V I tr and a turn-off 0.5 V I tf
       * (so a switching cycle costs 0.5 V I (tr + tf)).
       */
      readonly kind: 'linear-overlap';
      /** Current rise (turn-on) time, seconds. */
      readonly riseS: number;
      /** Current fall (turn-off) time, seconds. */
      readonly fallS: number;
    }
  | {
      /**
       * Measured energies on a grid of commutated current and blocked voltage, interpolated
       * bilinearly. `turnOnJ[i][j]` and `turnOffJ[i][j]` are the energies, joules, at
       * `currentsA[i]` and `volts[j]`.
       */
      readonly kind: 'energy-table';
      /** Current grid, amperes, strictly increasing, at least 2 points. */
      readonly currentsA: readonly number[];
      /** Voltage grid, volts, strictly increasing, at least 2 points. */
      readonly volts: readonly number[];
      readonly turnOnJ: readonly (readonly number[])[];
      readonly turnOffJ: readonly (readonly number[])[];
      /**
       * Outside the grid (default 'linear'): 'linear' extends the bilinear form of the edge
       * cell; 'clamp' holds the query at the nearest grid edge. Either way the energy is
       * floored at 0 J.
       */
      readonly extrapolation?: 'linear' | 'clamp';
    };

/** Switching-loss data of one controlled switch (all optional). */
export interface SwitchLossParams {
  readonly transitions?: TransitionModel;
  /** Output capacitance, farads: 0.5 Coss V^2 is lost at each hard turn-on from V volts. */
  readonly outputCapacitanceF?: number;
  /** Gate drive: Qg Vdrive is lost per switching cycle (counted at each turn-on). */
  readonly gate?: {
    /** Total gate charge, coulombs. */
    readonly chargeC: number;
    /** Gate drive voltage, volts. */
    readonly driveVolts: number;
  };
  /** Reverse-recovery charge of the body diode, coulombs (Qrr V lost when it is forced off). */
  readonly bodyDiodeRecoveredChargeC?: number;
}

/** Switching-loss data of a diode. */
export interface DiodeLossParams {
  /** Reverse-recovery charge, coulombs: Qrr V is lost when a switch turning on forces the conducting diode off against V volts. */
  readonly recoveredChargeC: number;
}

/** Switching-loss data by element id. */
export interface SwitchingLossModels {
  /** By switch element id. */
  readonly switches?: Readonly<Record<string, SwitchLossParams>>;
  /** By diode element id. */
  readonly diodes?: Readonly<Record<string, DiodeLossParams>>;
}

/** Turn-on energy of the linear-overlap model, joules: 0.5 V I tr. */
export function overlapTurnOnJ(volts: number, amps: number, riseS: number): number {
  return 0.5 * volts * amps * riseS;
}

/** Turn-off energy of the linear-overlap model, joules: 0.5 V I tf. */
export function overlapTurnOffJ(volts: number, amps: number, fallS: number): number {
  return 0.5 * volts * amps * fallS;
}

/** Index of the grid cell used for x (the edge cell outside the grid). */
function cellOf(grid: readonly number[], x: number): number {
  let i = 0;
  while (i < grid.length - 2 && x > grid[i + 1]!) i++;
  return i;
}

/**
 * Bilinear interpolation of an energy table at (amps, volts), joules, floored at 0.
 * `extrapolation` as in {@link TransitionModel}. Allocates nothing (called per event).
 */
export function interpolateEnergyJ(
  currentsA: readonly number[],
  volts: readonly number[],
  table: readonly (readonly number[])[],
  amps: number,
  v: number,
  extrapolation: 'linear' | 'clamp' = 'linear',
): number {
  const i = cellOf(currentsA, amps);
  const j = cellOf(volts, v);
  let s = (amps - currentsA[i]!) / (currentsA[i + 1]! - currentsA[i]!);
  let t = (v - volts[j]!) / (volts[j + 1]! - volts[j]!);
  if (extrapolation === 'clamp') {
    s = s < 0 ? 0 : s > 1 ? 1 : s;
    t = t < 0 ? 0 : t > 1 ? 1 : t;
  }
  const r0 = table[i]!, r1 = table[i + 1]!;
  const e = (1 - s) * ((1 - t) * r0[j]! + t * r0[j + 1]!) + s * ((1 - t) * r1[j]! + t * r1[j + 1]!);
  return e > 0 ? e : 0;
}

function checkGrid(is: Issues, path: string, g: unknown): boolean {
  if (!Array.isArray(g) || g.length < 2) {
    is.add(path, 'must be an array of at least 2 numbers', g);
    return false;
  }
  for (let k = 0; k < g.length; k++) {
    if (typeof g[k] !== 'number' || !Number.isFinite(g[k])) {
      is.add(`${path}[${k}]`, 'must be a finite number', g[k]);
      return false;
    }
    if (k > 0 && !(g[k] > g[k - 1])) {
      is.add(`${path}[${k}]`, 'must be greater than the point before it (strictly increasing grid)', g[k]);
      return false;
    }
  }
  return true;
}

function checkTable(is: Issues, path: string, t: unknown, rows: number, cols: number): void {
  if (!Array.isArray(t) || t.length !== rows) {
    is.add(path, `must have ${rows} rows (one per current)`, Array.isArray(t) ? `${t.length} rows` : t);
    return;
  }
  t.forEach((row: unknown, i) => {
    if (!Array.isArray(row) || row.length !== cols) is.add(`${path}[${i}]`, `must have ${cols} entries (one per voltage)`, row);
    else row.forEach((e: unknown, j) => {
      if (typeof e !== 'number' || !Number.isFinite(e) || e < 0) is.add(`${path}[${i}][${j}]`, 'must be a finite energy >= 0 J', e);
    });
  });
}

/** Validates switching-loss models; throws ParameterError naming every invalid entry. */
export function validateSwitchingLossModels(m: SwitchingLossModels): void {
  const is = new Issues('switching-loss models');
  for (const [id, s] of Object.entries(m.switches ?? {})) {
    const p = `switches.${id}`;
    if (!is.object(p, s)) continue;
    const tr = s.transitions;
    if (tr !== undefined) {
      if (tr.kind === 'linear-overlap') {
        is.nonNegative(`${p}.transitions.riseS`, tr.riseS, 0);
        is.nonNegative(`${p}.transitions.fallS`, tr.fallS, 0);
        if (tr.riseS === undefined) is.add(`${p}.transitions.riseS`, 'is required', undefined);
        if (tr.fallS === undefined) is.add(`${p}.transitions.fallS`, 'is required', undefined);
      } else if (tr.kind === 'energy-table') {
        const okI = checkGrid(is, `${p}.transitions.currentsA`, tr.currentsA);
        const okV = checkGrid(is, `${p}.transitions.volts`, tr.volts);
        if (okI && okV) {
          checkTable(is, `${p}.transitions.turnOnJ`, tr.turnOnJ, tr.currentsA.length, tr.volts.length);
          checkTable(is, `${p}.transitions.turnOffJ`, tr.turnOffJ, tr.currentsA.length, tr.volts.length);
        }
        if (tr.extrapolation !== undefined && tr.extrapolation !== 'linear' && tr.extrapolation !== 'clamp') {
          is.add(`${p}.transitions.extrapolation`, "must be 'linear' or 'clamp'", tr.extrapolation);
        }
      } else is.add(`${p}.transitions.kind`, "must be 'linear-overlap' or 'energy-table'", (tr as { kind?: unknown }).kind);
    }
    is.nonNegative(`${p}.outputCapacitanceF`, s.outputCapacitanceF, 0);
    is.nonNegative(`${p}.bodyDiodeRecoveredChargeC`, s.bodyDiodeRecoveredChargeC, 0);
    if (is.object(`${p}.gate`, s.gate, true)) {
      is.nonNegative(`${p}.gate.chargeC`, s.gate!.chargeC, 0);
      is.nonNegative(`${p}.gate.driveVolts`, s.gate!.driveVolts, 0);
      if (s.gate!.chargeC === undefined) is.add(`${p}.gate.chargeC`, 'is required', undefined);
      if (s.gate!.driveVolts === undefined) is.add(`${p}.gate.driveVolts`, 'is required', undefined);
    }
  }
  for (const [id, d] of Object.entries(m.diodes ?? {})) {
    const p = `diodes.${id}`;
    if (!is.object(p, d)) continue;
    is.nonNegative(`${p}.recoveredChargeC`, d.recoveredChargeC, 0);
    if (d.recoveredChargeC === undefined) is.add(`${p}.recoveredChargeC`, 'is required', undefined);
  }
  is.done();
}
