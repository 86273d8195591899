import type { Stage } from '../stage.ts';
import { assembleStage, NODES, type ConverterParams } from './common.ts';

/**
 * Builds a boost stage: L1 from the input `vin` to the switch node `sw`, Q1 from `sw` to
 * ground, rectifier (D1 or Q2) from `sw` to the output `out`, C1 and the load at `out`.
 * Throws {@link ParameterError} naming every invalid parameter.
 */
export function buildBoost(params: ConverterParams): Stage {
  const { input, switchNode, output } = NODES;
  return assembleStage('boost', params, {
    main: { drain: switchNode, source: '0' },
    rectifier: { anode: switchNode, cathode: output },
    inductor: { a: input, b: switchNode },
    polarity: 1,
  });
}
