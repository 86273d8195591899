#!/usr/bin/env node
// Runs the bundled command (packages/cli/dist, built by `pnpm install` with
// scripts/build-cli.mjs) when it is at least as new as every source file; otherwise runs the
// TypeScript sources directly through tsx, so an edited source is never shadowed by a stale
// bundle. EDGEWISE_FROM_SOURCES=1 forces the sources.
import { existsSync, readdirSync, statSync } from 'node:fs';
import { fileURLToPath } from 'node:url';

const pkgs = fileURLToPath(new URL('../../', import.meta.url));
const bundle = fileURLToPath(new URL('../dist/edgewise.mjs', import.meta.url));
const built = fileURLToPath(new URL('../dist/BUILT', import.meta.url));

function newestSource(dir) {
  let newest = 0;
  for (const entry of readdirSync(dir, { withFileTypes: true })) {
    const p = `${dir}/${entry.name}`;
    if (entry.isDirectory()) newest = Math.max(newest, newestSource(p));
    else if (entry.name.endsWith('.ts') || entry.name.endsWith('.mjs')) newest = Math.max(newest, statSync(p).mtimeMs);
  }
  return newest;
}

function bundleIsFresh() {
  if (process.env.EDGEWISE_FROM_SOURCES === '1' || !existsSync(bundle) || !existsSync(built)) return false;
  const at = statSync(built).mtimeMs;
  for (const pkg of ['engine', 'models', 'cli']) if (newestSource(`${pkgs}${pkg}/src`) > at) return false;
  return true;
}

if (bundleIsFresh()) {
  await import(bundle);
} else {
  const { register } = await import('tsx/esm/api');
  register();
  await import('../src/main.ts');
}
