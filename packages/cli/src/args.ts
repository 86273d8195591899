/**
 * A small command-line parser: positional arguments and `--name value` / `--name=value`
 * options, checked against each command's declared options.
 * @module
 */
import { InputError } from './errors.ts';

/** Declared option: a flag (no value) or an option taking a value. */
export interface OptionDecl {
  readonly name: string;
  readonly value?: string; // placeholder shown in help, e.g. "FILE"; absent for flags
  readonly help: string;
}

export interface ParsedArgs {
  readonly positional: string[];
  readonly options: Map<string, string | true>;
}

/** Parses argv against the declared options; unknown options are InputErrors. */
export function parseArgs(argv: readonly string[], decls: readonly OptionDecl[], command: string): ParsedArgs {
  const byName = new Map(decls.map((d) => [d.name, d]));
  const positional: string[] = [];
  const options = new Map<string, string | true>();
  for (let i = 0; i < argv.length; i++) {
    const a = argv[i]!;
    if (a === '--') {
      positional.push(...argv.slice(i + 1));
      break;
    }
    if (a.startsWith('--')) {
      const eq = a.indexOf('=');
      const name = eq >= 0 ? a.slice(2, eq) : a.slice(2);
      const decl = byName.get(name);
      if (decl === undefined) {
        throw new InputError(`edgewise ${command}`, [`unknown option --${name}; options: ${decls.map((d) => `--${d.name}`).join(', ')}`]);
      }
      if (decl.value === undefined) {
        if (eq >= 0) throw new InputError(`edgewise ${command}`, [`option --${name} takes no value`]);
        options.set(name, true);
      } else {
        const v = eq >= 0 ? a.slice(eq + 1) : argv[++i];
        if (v === undefined) throw new InputError(`edgewise ${command}`, [`option --${name} needs a value (${decl.value})`]);
        options.set(name, v);
      }
    } else if (a === '-h') {
      options.set('help', true);
    } else {
      positional.push(a);
    }
  }
  return { positional, options };
}

/** Value of an option taking a value, or undefined. */
export function optValue(args: ParsedArgs, name: string): string | undefined {
  const v = args.options.get(name);
  return typeof v === 'string' ? v : undefined;
}

/** Whether a flag is set. */
export function optFlag(args: ParsedArgs, name: string): boolean {
  return args.options.get(name) === true;
}
