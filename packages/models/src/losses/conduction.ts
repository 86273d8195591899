import type { CircuitSpec } from '@edgewise/engine';

/** Where a conduction loss arises. */
export type ConductionPart = 'channel' | 'body-diode' | 'diode' | 'winding' | 'esr' | 'resistor' | 'source-resistance';

/**
 * One conduction-loss term: power = scale * (signal `of`) * (signal `times`), averaged exactly
 * with an engine integral. Devices and resistors dissipate v * i; winding resistance, ESR and
 * source resistance dissipate R i^2 (the ideal L or C inside stores, it does not dissipate).
 */
export interface ConductionTerm {
  readonly element: string;
  readonly part: ConductionPart;
  readonly of: string;
  readonly times: string;
  readonly scale: number;
}

/**
 * The conduction-loss terms of every dissipating part of a circuit except the ids in `exclude`
 * (loads). A source's internal resistance is included only when asked: loss analyses that take
 * the input power at the source's terminals leave it outside.
 */
export function conductionTerms(spec: CircuitSpec, exclude: ReadonlySet<string>, options: { readonly sourceResistance?: boolean } = {}): ConductionTerm[] {
  const out: ConductionTerm[] = [];
  const add = (element: string, part: ConductionPart, of: string, times: string, scale: number): void => {
    out.push({ element, part, of, times, scale });
  };
  for (const e of spec.elements) {
    if (exclude.has(e.id)) continue;
    switch (e.kind) {
      case 'switch':
        add(e.id, 'channel', `${e.id}.voltage`, `${e.id}.channel.current`, 1);
        if (e.bodyDiode !== undefined) add(e.id, 'body-diode', `${e.id}.body.voltage`, `${e.id}.body.current`, 1);
        break;
      case 'diode':
        add(e.id, 'diode', `${e.id}.voltage`, `${e.id}.current`, 1);
        break;
      case 'inductor':
        if ((e.seriesOhms ?? 0) > 0) add(e.id, 'winding', `${e.id}.current`, `${e.id}.current`, e.seriesOhms!);
        break;
      case 'capacitor':
        if ((e.esrOhms ?? 0) > 0) add(e.id, 'esr', `${e.id}.current`, `${e.id}.current`, e.esrOhms!);
        break;
      case 'resistor':
        add(e.id, 'resistor', `${e.id}.voltage`, `${e.id}.current`, 1);
        break;
      case 'voltage-source':
        if (options.sourceResistance === true && (e.seriesOhms ?? 0) > 0) add(e.id, 'source-resistance', `${e.id}.current`, `${e.id}.current`, e.seriesOhms!);
        break;
      default:
        break;
    }
  }
  return out;
}
