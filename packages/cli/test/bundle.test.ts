import { execFileSync } from 'node:child_process';
import { fileURLToPath } from 'node:url';
import { describe, expect, it } from 'vitest';

// The binary runs the esbuild bundle when it is fresh and the TypeScript sources otherwise:
// both must behave the same (same bytes out for the same scenario).
const bin = fileURLToPath(new URL('../bin/edgewise.mjs', import.meta.url));
const scenario = fileURLToPath(new URL('../../../test-vectors/rc-step.json', import.meta.url));

function run(fromSources: boolean): string {
  return execFileSync(process.execPath, [bin, 'run', scenario, '--summary', '-'], {
    env: { ...process.env, EDGEWISE_FROM_SOURCES: fromSources ? '1' : '0' },
    encoding: 'utf8',
  });
}

describe('bundled and source binaries', () => {
  it('give the same summary for the same scenario', () => {
    const a = JSON.parse(run(false)) as Record<string, unknown>;
    const b = JSON.parse(run(true)) as Record<string, unknown>;
    expect(a).toEqual(b);
    expect((a.signals as Record<string, { mean: number }>).c).toBeDefined();
  });
});
