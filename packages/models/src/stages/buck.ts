import type { Stage } from '../stage.ts';
import { assembleStage, NODES, type ConverterParams } from './common.ts';

/**
 * Builds a buck stage: Q1 from the input `vin` to the switch node `sw`, rectifier (D1 or Q2)
 * from ground to `sw`, L1 from `sw` to the output `out`, C1 and the load at `out`.
 * Throws {@link ParameterError} naming every invalid parameter.
 */
export function buildBuck(params: ConverterParams): Stage {
  const { input, switchNode, output } = NODES;
  return assembleStage('buck', params, {
    main: { drain: input, source: switchNode },
    rectifier: { anode: '0', cathode: switchNode },
    inductor: { a: switchNode, b: output },
    polarity: 1,
  });
}
