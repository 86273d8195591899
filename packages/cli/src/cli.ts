/**
 * The edgewise command line: dispatches to the commands, maps errors to exit statuses
 * (2 invalid input, 1 failed simulation) and prints one clear message, never a stack trace.
 * @module
 */
import { parseArgs } from './args.ts';
import { InputError, RunFailure } from './errors.ts';
import { checkCommand } from './commands/check.ts';
import { helpText, type Command } from './commands/common.ts';
import { demoCommand } from './commands/demo.ts';
import { runCommand } from './commands/run.ts';
import { schemaCommand } from './commands/schema.ts';
import { extraCommands } from './commands/registry.ts';

const COMMANDS: readonly Command[] = [runCommand, ...extraCommands, checkCommand, schemaCommand, demoCommand];

function topHelp(): string {
  const width = Math.max(...COMMANDS.map((c) => c.name.length)) + 2;
  return [
    'edgewise: time-domain simulation of switched DC-DC converters',
    '',
    'usage: edgewise COMMAND [ARGS] [--help]',
    '',
    'commands:',
    ...COMMANDS.map((c) => `  ${c.name.padEnd(width)} ${c.summary}`),
    '',
    'exit status: 0 success, 1 simulation failure, 2 invalid input',
    'example: edgewise run examples/pol-buck.json --out out/pol.csv',
    '',
  ].join('\n');
}

/** Runs the CLI with the given arguments; returns the exit status. */
export async function main(argv: readonly string[]): Promise<number> {
  try {
    const [name, ...rest] = argv;
    if (name === undefined || name === '--help' || name === '-h' || name === 'help') {
      process.stdout.write(topHelp());
      return name === undefined ? 2 : 0;
    }
    const command = COMMANDS.find((c) => c.name === name);
    if (command === undefined) {
      throw new InputError('edgewise', [`unknown command "${name}"; commands: ${COMMANDS.map((c) => c.name).join(', ')}`]);
    }
    const args = parseArgs(rest, command.options, command.name);
    if (args.options.get('help') === true) {
      process.stdout.write(helpText(command));
      return 0;
    }
    return await command.run(args);
  } catch (err) {
    if (err instanceof InputError || err instanceof RunFailure) {
      process.stderr.write(`edgewise: ${err.message}\n`);
      return err.exitCode;
    }
    const e = err as NodeJS.ErrnoException;
    if (e !== null && typeof e === 'object' && typeof e.code === 'string' && typeof e.syscall === 'string') {
      // File system problems with outputs: the user's input (paths) is at fault.
      process.stderr.write(`edgewise: ${e.syscall} ${e.path ?? ''}: ${e.code}\n`);
      return 2;
    }
    process.stderr.write(`edgewise: internal error: ${err instanceof Error ? err.message : String(err)}\n`);
    return 1;
  }
}



