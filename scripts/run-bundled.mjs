// Runs a TypeScript benchmark as the code ships: bundled by esbuild (as the command's binary
// is), not through the tsx loader used in development. The loader keeps function names by
// wrapping every closure creation and class in a naming helper, which costs the engine's
// per-event code up to a factor of two and would be measured instead of the engine.
//   node scripts/run-bundled.mjs <entry.ts> [node flags --] [arguments]
import { build } from 'esbuild';
import { spawnSync } from 'node:child_process';
import { mkdirSync } from 'node:fs';
import { basename } from 'node:path';
import { fileURLToPath } from 'node:url';

const root = fileURLToPath(new URL('..', import.meta.url));
const [entry, ...rest] = process.argv.slice(2);
if (!entry) {
  console.error('usage: node scripts/run-bundled.mjs <entry.ts> [node flags --] [arguments]');
  process.exit(2);
}
const sep = rest.indexOf('--');
const nodeFlags = sep >= 0 ? rest.slice(0, sep) : [];
const args = sep >= 0 ? rest.slice(sep + 1) : rest;
const outdir = `${root}node_modules/.cache/edgewise-bench`;
mkdirSync(outdir, { recursive: true });
const outfile = `${outdir}/${basename(entry).replace(/\.ts$/, '')}.mjs`;
try {
  await build({
    absWorkingDir: root,
    entryPoints: [entry],
    outfile,
    bundle: true,
    format: 'esm',
    platform: 'node',
    target: 'node20',
    logLevel: 'warning',
    banner: { js: "import { createRequire as __edgewiseRequire } from 'node:module'; const require = __edgewiseRequire(import.meta.url);" },
  });
} catch (err) {
  console.error(`could not bundle ${entry}: ${err instanceof Error ? err.message : String(err)}`);
  process.exit(1);
}
const r = spawnSync(process.execPath, [...nodeFlags, outfile, ...args], { stdio: 'inherit' });
process.exit(r.status ?? 1);
