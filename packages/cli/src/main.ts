/** Entry point of the edgewise binary. @module */
import { main } from './cli.ts';

process.exitCode = await main(process.argv.slice(2));
