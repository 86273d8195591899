/**
 * Stage plants: a converter stage from the models package with a control law. Provisional
 * until the stage builders land; the mapping onto their parameters is in build-stage.ts.
 * @module
 */
import { z } from 'zod';
import { quantity } from './quantity.ts';

export const stageSchema = z.strictObject({
  kind: z.literal('stage'),
  converter: z.enum(['buck', 'boost', 'buck-boost']),
  rectification: z.enum(['diode', 'synchronous']),
  inputVolts: quantity('V', 'positive', 'input voltage'),
  frequency: quantity('Hz', 'positive', 'switching frequency'),
  inductor: z.strictObject({ henries: quantity('H', 'positive'), seriesOhms: quantity('Ω', 'nonnegative').optional() }),
  capacitor: z.strictObject({ farads: quantity('F', 'positive'), esrOhms: quantity('Ω', 'nonnegative').optional() }),
  load: z.discriminatedUnion('kind', [
    z.strictObject({ kind: z.literal('resistor'), ohms: quantity('Ω', 'positive') }),
    z.strictObject({ kind: z.literal('current'), amps: quantity('A') }),
  ]),
  control: z.looseObject({ kind: z.string().min(1) }),
});

export type StagePlant = z.output<typeof stageSchema>;
