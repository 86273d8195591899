/**
 * Shared pieces of the commands: declarations, the scenario argument, output paths.
 * @module
 */
import { InputError } from '../errors.ts';
import type { OptionDecl, ParsedArgs } from '../args.ts';

/** A command of the CLI. */
export interface Command {
  readonly name: string;
  readonly summary: string;
  readonly usage: string;
  readonly options: readonly OptionDecl[];
  readonly example: string;
  readonly details?: string;
  run(args: ParsedArgs): Promise<number>;
}

export const QUIET: OptionDecl = { name: 'quiet', help: 'print nothing but errors (and requested output)' };
export const HELP: OptionDecl = { name: 'help', help: 'show this help' };

/** The single scenario file argument of a command. */
export function scenarioArg(args: ParsedArgs, command: string): string {
  if (args.positional.length !== 1) {
    throw new InputError(`edgewise ${command}`, [args.positional.length === 0 ? 'missing the scenario FILE argument' : `expected one scenario FILE, received ${args.positional.length} arguments`]);
  }
  return args.positional[0]!;
}

/** Informational message on stderr unless quiet. */
export function say(quiet: boolean, message: string): void {
  if (!quiet) process.stderr.write(`${message}\n`);
}

/** Help text of a command. */
export function helpText(c: Command): string {
  const width = Math.max(...c.options.map((o) => o.name.length + (o.value !== undefined ? o.value.length + 1 : 0))) + 4;
  const lines = [
    `edgewise ${c.name}: ${c.summary}`,
    '',
    `usage: ${c.usage}`,
    '',
    ...(c.details !== undefined ? [c.details, ''] : []),
    'options:',
    ...c.options.map((o) => `  ${`--${o.name}${o.value !== undefined ? ` ${o.value}` : ''}`.padEnd(width)} ${o.help}`),
    '',
    'example:',
    `  ${c.example}`,
  ];
  return `${lines.join('\n')}\n`;
}
