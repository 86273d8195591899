// Bundles the edgewise command (and its sweep worker) into packages/cli/dist with esbuild, so
// that the binary starts in a fraction of a second instead of compiling TypeScript at each
// start. Run by `pnpm install` (prepare). The binary falls back to running the sources through
// tsx when the bundle is missing or older than any source file, so a stale bundle never runs.
import { build } from 'esbuild';
import { mkdirSync, writeFileSync } from 'node:fs';
import { fileURLToPath } from 'node:url';

const root = fileURLToPath(new URL('..', import.meta.url));
const outdir = `${root}packages/cli/dist`;
mkdirSync(outdir, { recursive: true });
try {
  await build({
    absWorkingDir: root,
    entryPoints: { edgewise: 'packages/cli/src/main.ts', 'sweep-worker': 'packages/cli/src/sweep/worker.ts' },
    outdir,
    outExtension: { '.js': '.mjs' },
    bundle: true,
    splitting: true,
    format: 'esm',
    platform: 'node',
    target: 'node20',
    sourcemap: 'linked',
    logLevel: 'warning',
    // some dependencies are CommonJS: give the ESM bundle a require
    banner: { js: "import { createRequire as __edgewiseRequire } from 'node:module'; const require = __edgewiseRequire(import.meta.url);" },
  });
  writeFileSync(`${outdir}/BUILT`, `${new Date().toISOString()}\n`);
  console.log(`edgewise: bundled the command into ${outdir}`);
} catch (err) {
  // not fatal: the binary runs the sources through tsx without a bundle
  console.warn(`edgewise: could not bundle the command (${err instanceof Error ? err.message : String(err)}); it will run from the sources`);
}
