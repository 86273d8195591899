export { LossAccountant } from './accountant.ts';
export type { SwitchingEnergy } from './accountant.ts';
export { analyzeLosses, switchingPowers } from './analyze.ts';
export type { ConductionLoss, LossAnalysisOptions, LossReport, SwitchingLoss } from './analyze.ts';
export { conductionTerms } from './conduction.ts';
export type { ConductionPart, ConductionTerm } from './conduction.ts';
export {
  interpolateEnergyJ,
  overlapTurnOffJ,
  overlapTurnOnJ,
  validateSwitchingLossModels,
} from './switching.ts';
export type { DiodeLossParams, SwitchLossParams, SwitchingLossModels, TransitionModel } from './switching.ts';
