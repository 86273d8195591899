/**
 * Stage plants: a converter stage of the models package with a control law. Field names are
 * those of the models' parameters (`StageParams` and each law's parameters), so a stage plant
 * maps onto `buildStage` and the law one to one; quantities may carry units.
 * @module
 */
import { z } from 'zod';
import { quantity } from './quantity.ts';

const switchParams = z.strictObject({
  onOhms: quantity('Ω', 'nonnegative').optional(),
  offOhms: quantity('Ω', 'positive').optional(),
  bodyDiode: z.strictObject({ forwardVolts: quantity('V', 'nonnegative').optional(), onOhms: quantity('Ω', 'nonnegative').optional() }).optional(),
});

const deadTime = z.strictObject({
  mainOffToSyncOnS: quantity('s', 'nonnegative').optional(),
  syncOffToMainOnS: quantity('s', 'nonnegative').optional(),
});
const pwmCommon = {
  deadTime: deadTime.optional(),
  lightLoad: z.enum(['forced-ccm', 'diode-emulation']).optional(),
  currentLimit: z.strictObject({
    amps: quantity('A', 'positive'),
    sense: z.enum(['inductor', 'switch']).optional(),
    blankingS: quantity('s', 'nonnegative').optional(),
  }).optional(),
};
const reference = {
  referenceVolts: quantity('V', 'any', 'reference at the error amplifier'),
  softStartS: quantity('s', 'nonnegative').optional(),
  referenceSchedule: z.array(z.strictObject({ atS: quantity('s', 'nonnegative'), volts: quantity('V') })).optional(),
  feedbackGain: z.number().optional(),
};
const compensator = z.discriminatedUnion('kind', [
  z.strictObject({ kind: z.literal('type-ii'), r1: quantity('Ω', 'positive'), r2: quantity('Ω', 'positive'), c1: quantity('F', 'positive'), c2: quantity('F', 'positive') }),
  z.strictObject({
    kind: z.literal('type-iii'),
    r1: quantity('Ω', 'positive'), r2: quantity('Ω', 'positive'), r3: quantity('Ω', 'positive'),
    c1: quantity('F', 'positive'), c2: quantity('F', 'positive'), c3: quantity('F', 'positive'),
  }),
  z.strictObject({
    kind: z.literal('poles-zeros'),
    integratorRadPerS: z.number().positive().optional(),
    midbandGain: z.number().positive().optional(),
    zerosHz: z.array(quantity('Hz', 'positive')),
    polesHz: z.array(quantity('Hz', 'positive')),
  }),
  z.strictObject({ kind: z.literal('transfer-function'), num: z.array(z.number()).min(1), den: z.array(z.number()).min(1) }),
]);
const driveOptions = {
  deadTimeS: quantity('s', 'nonnegative').optional(),
  diodeEmulation: z.boolean().optional(),
};

/** Control laws of stage plants (the models' laws; `kind` picks the law). */
export const controlSchema = z.discriminatedUnion('kind', [
  z.strictObject({
    kind: z.literal('open-loop'),
    ...pwmCommon,
    duty: quantity('1', 'fraction').optional(),
    dutySchedule: z.array(z.strictObject({ atS: quantity('s', 'nonnegative'), duty: quantity('1', 'fraction') })).optional(),
    minOnTimeS: quantity('s', 'nonnegative').optional(),
  }),
  z.strictObject({
    kind: z.literal('voltage-mode'),
    ...pwmCommon,
    ...reference,
    compensator,
    ramp: z.strictObject({ valleyVolts: quantity('V').optional(), peakToPeakVolts: quantity('V', 'positive').optional() }).optional(),
    maxDuty: quantity('1', 'fraction').optional(),
    skipBelowVolts: quantity('V').optional(),
    initialControlVolts: quantity('V').optional(),
  }),
  z.strictObject({
    kind: z.literal('peak-current'),
    ...pwmCommon,
    senseOhms: quantity('Ω', 'positive', 'current-sense gain'),
    slopeCompensationVPerS: z.number().min(0).optional().meta({ description: 'slope compensation, volts per second' }),
    maxDuty: quantity('1', 'fraction').optional(),
    blankingS: quantity('s', 'nonnegative').optional(),
    command: z.discriminatedUnion('kind', [
      z.strictObject({ kind: z.literal('fixed'), volts: quantity('V').optional(), peakAmps: quantity('A').optional() }),
      z.strictObject({ kind: z.literal('voltage-loop'), ...reference, compensator, initialControlVolts: quantity('V').optional() }),
    ]),
  }),
  z.strictObject({
    kind: z.literal('constant-on-time'),
    ...driveOptions,
    referenceVolts: quantity('V'),
    onTime: z.discriminatedUnion('kind', [
      z.strictObject({ kind: z.literal('fixed'), seconds: quantity('s', 'positive') }),
      z.strictObject({ kind: z.literal('adaptive'), frequencyHz: quantity('Hz', 'positive'), minS: quantity('s', 'positive').optional(), maxS: quantity('s', 'positive').optional() }),
    ]),
    minOffTimeS: quantity('s', 'positive'),
    feedbackGain: z.number().optional(),
    rippleInjection: z.discriminatedUnion('kind', [
      z.strictObject({ kind: z.literal('current'), ohms: quantity('Ω', 'positive') }),
      z.strictObject({ kind: z.literal('ramp'), voltsPerS: z.number().positive() }),
    ]).optional(),
    minFrequencyHz: quantity('Hz', 'positive').optional(),
    currentLimit: z.strictObject({ peakAmps: quantity('A', 'positive') }).optional(),
  }),
  z.strictObject({
    kind: z.literal('hysteretic'),
    ...driveOptions,
    referenceVolts: quantity('V'),
    bandVolts: quantity('V', 'positive'),
    feedbackGain: z.number().optional(),
    comparatorDelayS: quantity('s', 'nonnegative').optional(),
    currentLimit: z.strictObject({ peakAmps: quantity('A', 'positive'), offTimeS: quantity('s', 'positive') }).optional(),
  }),
]);

export const stageSchema = z.strictObject({
  kind: z.literal('stage'),
  converter: z.enum(['buck', 'boost', 'buck-boost']),
  rectification: z.enum(['diode', 'synchronous']).optional(),
  switchingHz: quantity('Hz', 'positive', 'switching frequency'),
  input: z.strictObject({
    volts: quantity('V', 'positive'),
    sourceOhms: quantity('Ω', 'nonnegative').optional(),
    steps: z.array(z.strictObject({ atS: quantity('s', 'nonnegative'), value: quantity('V') })).optional(),
    filter: z.strictObject({
      henries: quantity('H', 'positive'), seriesOhms: quantity('Ω', 'nonnegative').optional(),
      farads: quantity('F', 'positive'), esrOhms: quantity('Ω', 'nonnegative').optional(),
    }).optional(),
  }),
  inductor: z.strictObject({ henries: quantity('H', 'positive'), seriesOhms: quantity('Ω', 'nonnegative').optional() }),
  outputCapacitor: z.strictObject({ farads: quantity('F', 'positive'), esrOhms: quantity('Ω', 'nonnegative').optional() }),
  load: z.discriminatedUnion('kind', [
    z.strictObject({ kind: z.literal('resistor'), ohms: quantity('Ω', 'positive'), steps: z.array(z.strictObject({ atS: quantity('s', 'positive'), ohms: quantity('Ω', 'positive') })).optional() }),
    z.strictObject({ kind: z.literal('current'), amps: quantity('A'), steps: z.array(z.strictObject({ atS: quantity('s', 'positive'), amps: quantity('A') })).optional() }),
  ]),
  mainSwitch: switchParams.optional(),
  diode: z.strictObject({ forwardVolts: quantity('V', 'nonnegative').optional(), onOhms: quantity('Ω', 'nonnegative').optional(), offOhms: quantity('Ω', 'positive').optional() }).optional(),
  syncSwitch: switchParams.optional(),
  initial: z.strictObject({ outputVolts: quantity('V').optional(), inductorAmps: quantity('A').optional() }).optional(),
  control: controlSchema,
});

export type StagePlant = z.output<typeof stageSchema>;
