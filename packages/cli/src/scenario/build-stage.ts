/**
 * Maps a stage plant onto the models package (stage builder and control law).
 * @module
 */
import type { CircuitSpec, Controller } from '@edgewise/engine';
import type { Stage } from '@edgewise/models';
import { InputError } from '../errors.ts';
import type { StagePlant } from './stage-schema.ts';

/** A stage closed with its control law. */
export interface BuiltStage {
  readonly circuit: CircuitSpec;
  readonly createController: () => Controller | undefined;
  readonly periodS: number;
  readonly stage: Stage;
}

/** Builds the stage and control law of a stage plant. */
export function buildStagePlant(_plant: StagePlant, where: string): BuiltStage {
  throw new InputError(where, ['plant: stage plants are not available yet in this build; use a raw circuit (plant.kind "circuit")']);
}
