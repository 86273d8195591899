import type { Stage } from '../stage.ts';
import { assembleStage, NODES, type ConverterParams } from './common.ts';

/**
 * Builds an inverting buck-boost stage: Q1 from the input `vin` to the switch node `sw`, L1
 * from `sw` to ground, rectifier (D1 or Q2) from the output `out` to `sw`; the output voltage
 * is negative. Throws {@link ParameterError} naming every invalid parameter.
 */
export function buildBuckBoost(params: ConverterParams): Stage {
  const { input, switchNode, output } = NODES;
  return assembleStage('buck-boost', params, {
    main: { drain: input, source: switchNode },
    rectifier: { anode: output, cathode: switchNode },
    inductor: { a: switchNode, b: '0' },
    polarity: -1,
  });
}
