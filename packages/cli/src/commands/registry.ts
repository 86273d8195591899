/**
 * Commands beyond run/check/schema/demo.
 * @module
 */
import type { Command } from './common.ts';
import { compareCommand } from './compare.ts';
import { efficiencyCommand } from './efficiency.ts';
import { steadyCommand } from './steady.ts';
import { mergeCommand, sweepCommand } from './sweep.ts';

export const extraCommands: readonly Command[] = [steadyCommand, compareCommand, efficiencyCommand, sweepCommand, mergeCommand];
