/**
 * Maps a stage plant onto the models package: `buildStage` with the stage parameters and the
 * control law named by `control.kind`, closed with `closeLoop`. Parameter errors of the models
 * come back as InputErrors with the JSON path.
 * @module
 */
import type { CircuitSpec, Controller } from '@edgewise/engine';
import {
  ParameterError,
  buildStage,
  closeLoop,
  constantOnTime,
  hysteretic,
  openLoopPwm,
  peakCurrentMode,
  voltageMode,
  type ControlLaw,
  type Stage,
  type StageParams,
} from '@edgewise/models';
import { InputError } from '../errors.ts';
import type { StagePlant } from './stage-schema.ts';

/** A stage closed with its control law. */
export interface BuiltStage {
  readonly circuit: CircuitSpec;
  readonly createController: () => Controller | undefined;
  readonly periodS: number;
  readonly stage: Stage;
}

function law(stage: Stage, control: StagePlant['control']): ControlLaw {
  // The schema output has the law's own field names; `kind` only selects the law.
  const { kind, ...params } = control;
  switch (kind) {
    case 'open-loop':
      return openLoopPwm(stage, params as Parameters<typeof openLoopPwm>[1]);
    case 'voltage-mode':
      return voltageMode(stage, params as Parameters<typeof voltageMode>[1]);
    case 'peak-current':
      return peakCurrentMode(stage, params as Parameters<typeof peakCurrentMode>[1]);
    case 'constant-on-time':
      return constantOnTime(stage, params as Parameters<typeof constantOnTime>[1]);
    case 'hysteretic':
      return hysteretic(stage, params as Parameters<typeof hysteretic>[1]);
  }
}

/** Builds the stage and control law of a stage plant; throws InputError naming the JSON path. */
export function buildStagePlant(plant: StagePlant, where: string): BuiltStage {
  const { kind: _kind, converter, control, ...rest } = plant;
  let stage: Stage;
  try {
    stage = buildStage({ ...rest, kind: converter } as StageParams);
  } catch (err) {
    if (err instanceof ParameterError) throw new InputError(where, err.issues.map((i) => `plant.${i.path}: ${i.message}`));
    throw new InputError(where, [`plant: ${(err as Error).message}`]);
  }
  let closed;
  try {
    closed = closeLoop(stage, law(stage, control));
  } catch (err) {
    if (err instanceof ParameterError) throw new InputError(where, err.issues.map((i) => `plant.control.${i.path}: ${i.message}`));
    throw new InputError(where, [`plant.control: ${(err as Error).message}`]);
  }
  return { circuit: closed.circuit, createController: closed.createController, periodS: stage.periodS, stage };
}
