import type { Stage } from '../stage.ts';
import { buildBoost } from './boost.ts';
import { buildBuckBoost } from './buck-boost.ts';
import { buildBuck } from './buck.ts';
import { ParameterError, type StageParams } from './common.ts';

export { buildBuck } from './buck.ts';
export { buildBoost } from './boost.ts';
export { buildBuckBoost } from './buck-boost.ts';
export { ParameterError, NODES, GATES, validateConverterParams } from './common.ts';
export type {
  BodyDiodeParams,
  CapacitorParams,
  ConverterParams,
  DiodeParams,
  InductorParams,
  InputParams,
  LoadParams,
  ParameterIssue,
  StageGateEvent,
  StageParams,
  SwitchParams,
} from './common.ts';

/** Builds a stage of the given kind (dispatches to {@link buildBuck}, {@link buildBoost}, {@link buildBuckBoost}). */
export function buildStage(params: StageParams): Stage {
  const kind = (params as { kind?: unknown } | null)?.kind;
  switch (kind) {
    case 'buck':
      return buildBuck(params);
    case 'boost':
      return buildBoost(params);
    case 'buck-boost':
      return buildBuckBoost(params);
    default:
      throw new ParameterError('stage parameters', [{ path: 'kind', message: "must be 'buck', 'boost' or 'buck-boost'", received: kind }]);
  }
}
