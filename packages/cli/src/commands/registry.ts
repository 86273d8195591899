/**
 * Commands beyond run/check/schema/demo (steady, compare, sweep, merge).
 * @module
 */
import type { Command } from './common.ts';

export const extraCommands: readonly Command[] = [];
