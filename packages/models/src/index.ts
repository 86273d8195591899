/**
 * edgewise models: converter stages, control laws, loss models and analyses.
 * @packageDocumentation
 */
export * from './stage.ts';
export * from './stages/index.ts';
