/**
 * The binary end to end: error handling (exit statuses, JSON paths, no partial outputs),
 * determinism of CSV, sweep shards equal to one sweep, resume, help.
 */
import { existsSync, mkdtempSync, readdirSync, readFileSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { describe, expect, it } from 'vitest';
import { cli, inBatches } from './helpers.ts';

const tmp = mkdtempSync(join(tmpdir(), 'edgewise-cli-'));
const rcScenario = {
  name: 'rc',
  plant: { kind: 'circuit', elements: [
    { kind: 'voltage-source', id: 'V1', pos: 'in', neg: '0', volts: '10 V' },
    { kind: 'resistor', id: 'R1', a: 'in', b: 'c', ohms: '1 kOhm' },
    { kind: 'capacitor', id: 'C1', a: 'c', b: '0', farads: '1 uF' },
  ] },
  run: { stop: '1 ms', grid: '50 us', record: ['c'] },
};
function file(name: string, content: unknown): string {
  const p = join(tmp, name);
  writeFileSync(p, typeof content === 'string' ? content : JSON.stringify(content, null, 2));
  return p;
}

const stage = {
  name: 'stage',
  plant: {
    kind: 'stage', converter: 'buck', switchingHz: '100 kHz', input: { volts: 12 },
    inductor: { henries: '50 uH' }, outputCapacitor: { farads: '20 uF' }, load: { kind: 'resistor', ohms: 5 },
    control: { kind: 'open-loop', duty: 0.4 },
  },
  run: { cycles: 5 },
};
const compareRange = { ...stage, analyses: { compare: { fromHz: '1 kHz', toHz: '60 kHz' } } };
const lossUnit = { ...stage, switchingLosses: { switches: { Q1: { gate: { charge: '5 V', driveVolts: 5 } } } } };

describe('bad input: exit status 2 with the JSON path and the reason', () => {
  it('reports each case clearly, without stack traces', async () => {
    const bad = structuredClone(rcScenario) as { plant: { elements: Record<string, unknown>[] }; run: Record<string, unknown> };
    bad.plant.elements[2]!.farads = '1 uH';
    const unknownSignal = structuredClone(rcScenario);
    unknownSignal.run.record = ['nope'];
    const failing = {
      name: 'shoot',
      plant: { kind: 'circuit', elements: [
        { kind: 'voltage-source', id: 'V1', pos: 'in', neg: '0', volts: 5 },
        { kind: 'switch', id: 'QA', drain: 'in', source: 'x', gate: 'a', initiallyOn: true },
        { kind: 'switch', id: 'QB', drain: 'x', source: '0', gate: 'b', initiallyOn: true },
        { kind: 'resistor', id: 'R1', a: 'x', b: '0', ohms: 1 },
      ] },
      run: { stop: '1 us' },
    };
    const cases: [string[], number, RegExp][] = [
      [['run', file('bad-unit.json', bad)], 2, /plant\.elements\[2\]\.farads: "1 uH": expected a value in F, received one in H/],
      [['run', file('bad-json.json', '{\n  "name": "x",\n  }')], 2, /invalid JSON at line 3, column 3/],
      [['run', file('unknown-signal.json', unknownSignal)], 2, /run\.record\[0\]: unknown signal "nope"; known signals: in, c, /],
      [['run', file('missing-run.json', { plant: rcScenario.plant })], 2, /run: /],
      [['check', join(tmp, 'does-not-exist.json')], 2, /file not found/],
      [['run'], 2, /missing the scenario FILE argument/],
      [['run', file('ok.json', rcScenario), '--bogus'], 2, /unknown option --bogus/],
      [['frobnicate'], 2, /unknown command "frobnicate"/],
      [['run', file('shoot.json', failing), '--out', join(tmp, 'shoot.csv')], 1, /simulation failed \(shoot-through\)/],
      [['compare', file('compare-circuit.json', rcScenario)], 2, /plant\.kind: compare needs a stage plant/],
      [['compare', file('compare-range.json', compareRange)], 2, /analyses\.compare\.toHz: must be below half the switching frequency/],
      [['efficiency', file('efficiency-missing.json', { ...stage, analyses: {} })], 2, /analyses\.efficiency: missing/],
      [['run', file('losses-unit.json', lossUnit), '--summary', join(tmp, 'losses.json')], 2, /switchingLosses\.switches\.Q1\.gate\.charge: "5 V": expected a value in C/],
    ];
    const results = await inBatches(cases, 4, ([args]) => cli(args));
    results.forEach((r, i) => {
      const [, code, pattern] = cases[i]!;
      expect(r.code, r.stderr).toBe(code);
      expect(r.stderr).toMatch(pattern);
      expect(r.stderr).not.toMatch(/\n\s+at /); // no stack trace
    });
    // The failed run left no output behind, not even a temporary file.
    expect(readdirSync(tmp).filter((f) => f.startsWith('shoot.csv') || f.startsWith('losses.json'))).toEqual([]);
  }, 60_000);
});

describe('outputs', () => {
  it('gives byte-identical CSV for the same scenario twice, with units in the header', async () => {
    const src = file('twice.json', rcScenario);
    const [a, b] = await Promise.all([cli(['run', src, '--quiet']), cli(['run', src, '--quiet'])]);
    expect(a.code).toBe(0);
    expect(a.stdout).toBe(b.stdout);
    expect(a.stdout.startsWith('time [s],c [V],topology\r\n')).toBe(true);
    // Grid point at 1 ms: v = 10 (1 - exp(-1)) (analytic RC step).
    const last = a.stdout.trim().split('\r\n').at(-1)!.split(',');
    expect(Number(last[1])).toBeCloseTo(10 * (1 - Math.exp(-1)), 9);
  }, 30_000);

  it('writes summary and report next to --out', async () => {
    const out = join(tmp, 'o', 'rc.csv');
    const r = await cli(['run', file('o.json', rcScenario), '--out', out, '--quiet']);
    expect(r.code, r.stderr).toBe(0);
    expect(existsSync(out) && existsSync(join(tmp, 'o', 'rc.summary.json')) && existsSync(join(tmp, 'o', 'rc.html'))).toBe(true);
    expect(readFileSync(join(tmp, 'o', 'rc.html'), 'utf8')).toContain('<svg');
  }, 30_000);

  it('prints help with an example for every command, and a JSON Schema', async () => {
    const commands = ['run', 'steady', 'compare', 'efficiency', 'sweep', 'merge', 'check', 'schema', 'demo'];
    const rs = await inBatches(commands, 4, (c) => cli([c, '--help']));
    rs.forEach((r, i) => {
      expect(r.code).toBe(0);
      expect(r.stdout).toContain(`edgewise ${commands[i]!}`);
      expect(r.stdout).toContain('example:');
    });
    const schema = await cli(['schema']);
    const parsed = JSON.parse(schema.stdout) as { $schema: string; properties: Record<string, unknown> };
    expect(parsed.$schema).toContain('json-schema.org');
    expect(Object.keys(parsed.properties)).toEqual(expect.arrayContaining(['plant', 'run', 'sweep']));
  }, 60_000);
});

describe('sweeps', () => {
  it('gives identical rows in one go, as 3 shards merged, and after resuming', async () => {
    const scen = 'examples/pol-sweep.json';
    const whole = join(tmp, 'whole.csv');
    const shards = [1, 2, 3].map((k) => join(tmp, `shard-${k}.csv`));
    const runs = await Promise.all([
      cli(['sweep', scen, '--out', whole, '--workers', '2', '--report', join(tmp, 'sweep.html'), '--chart', 'signals.out.mean', '--quiet']),
      ...shards.map((s, k) => cli(['sweep', scen, '--shard', `${k + 1}/3`, '--out', s, '--workers', '1', '--quiet'])),
    ]);
    runs.forEach((r) => expect(r.code, r.stderr).toBe(0));
    const merged = join(tmp, 'merged.csv');
    const m = await cli(['merge', '--out', merged, ...shards, '--quiet']);
    expect(m.code, m.stderr).toBe(0);
    expect(readFileSync(merged, 'utf8')).toBe(readFileSync(whole, 'utf8'));
    expect(readFileSync(whole, 'utf8').split('\r\n').length).toBe(12 + 2); // header, 12 points, final CRLF
    const html = readFileSync(join(tmp, 'sweep.html'), 'utf8');
    expect(html).toContain('Outputs against /plant/drive/duty');
    expect(html.match(/<svg/g)?.length).toBe(1);

    // Resume: a journal holding some finished rows (one torn) is completed to the same file.
    const resumed = join(tmp, 'resumed.csv');
    const lines = readFileSync(whole, 'utf8').split('\r\n');
    writeFileSync(`${resumed}.journal`, `${lines.slice(0, 6).join('\r\n')}\r\n${lines[6]!.slice(0, 10)}`);
    const r = await cli(['sweep', scen, '--out', resumed, '--resume', '--workers', '1']);
    expect(r.code, r.stderr).toBe(0);
    expect(r.stderr).toContain('5 reused');
    expect(readFileSync(resumed, 'utf8')).toBe(readFileSync(whole, 'utf8'));
    expect(existsSync(`${resumed}.journal`)).toBe(false);
  }, 120_000);
});
