/**
 * `edgewise schema`: print the JSON Schema of scenario files.
 * @module
 */
import type { ParsedArgs } from '../args.ts';
import { scenarioJsonSchema } from '../scenario/schema.ts';
import { HELP, type Command } from './common.ts';

export const schemaCommand: Command = {
  name: 'schema',
  summary: 'print the JSON Schema (draft 2020-12) of scenario files, for editor completion',
  usage: 'edgewise schema > scenario.schema.json',
  options: [HELP],
  example: 'edgewise schema > scenario.schema.json',
  async run(_args: ParsedArgs) {
    const schema = { ...(scenarioJsonSchema() as object), title: 'edgewise scenario' };
    process.stdout.write(`${JSON.stringify(schema, null, 2)}\n`);
    return 0;
  },
};
