/**
 * HTML report of a sweep: each chosen output column against a swept grid parameter, one line
 * per combination of the other grid parameters; with Monte Carlo samples, the mean over the
 * samples with their minimum and maximum dashed.
 * @module
 */
import { InputError } from '../errors.ts';
import { renderReport, type Chart, type Series } from '../plot.ts';
import type { SweepSpec } from '../scenario/schema.ts';
import { parameterColumns } from './points.ts';

/** Renders the sweep report from the result rows (header first, as written to the CSV). */
export function renderSweepReport(
  title: string,
  sweep: SweepSpec,
  header: readonly string[],
  rows: readonly (readonly string[])[],
  choice: { readonly x: string | undefined; readonly columns: readonly string[] | undefined },
): string {
  const grid = (sweep.grid ?? []).map((a) => a.path);
  if (grid.length === 0) throw new InputError('edgewise sweep', ['--report: the sweep has no grid axis to plot against (Monte Carlo only)']);
  const x = choice.x ?? grid[0]!;
  if (!grid.includes(x)) throw new InputError('edgewise sweep', [`--x: "${x}" is not a grid axis; axes: ${grid.join(', ')}`]);
  const columns = choice.columns ?? sweep.outputs;
  for (const c of columns) {
    if (!sweep.outputs.includes(c)) throw new InputError('edgewise sweep', [`--chart: "${c}" is not an output of the sweep; outputs: ${sweep.outputs.join(', ')}`]);
  }
  const col = (name: string): number => header.indexOf(name);
  const status = header.length - 2;
  const ok = rows.filter((r) => r[status] === 'ok');
  const others = grid.filter((g) => g !== x);
  const groups = new Map<string, (readonly string[])[]>();
  for (const r of ok) {
    const key = others.map((o) => `${o} = ${r[col(o)]}`).join(', ');
    groups.set(key, [...(groups.get(key) ?? []), r]);
  }
  const mc = sweep.monteCarlo !== undefined;
  const charts: Chart[] = columns.map((c) => {
    const series: Series[] = [];
    for (const [key, rs] of groups) {
      const byX = new Map<number, number[]>();
      for (const r of rs) {
        const xv = Number(r[col(x)]), yv = Number(r[col(c)]);
        if (r[col(c)] === '' || !Number.isFinite(xv) || !Number.isFinite(yv)) continue;
        byX.set(xv, [...(byX.get(xv) ?? []), yv]);
      }
      const xs = [...byX.keys()].sort((a, b) => a - b);
      const name = key === '' ? c : key;
      series.push({ name: mc ? `${name} (mean)` : name, x: xs, y: xs.map((v) => byX.get(v)!.reduce((a, b) => a + b, 0) / byX.get(v)!.length) });
      if (mc) {
        series.push({ name: `${name} (min)`, x: xs, y: xs.map((v) => Math.min(...byX.get(v)!)), dashed: true });
        series.push({ name: `${name} (max)`, x: xs, y: xs.map((v) => Math.max(...byX.get(v)!)), dashed: true });
      }
    }
    return { title: c, xLabel: x, yLabel: c, series };
  });
  const failed = rows.length - ok.length;
  return renderReport({
    title: `edgewise sweep: ${title}`,
    sections: [{
      heading: `Outputs against ${x}`,
      charts,
      notes: [
        `${rows.length} points, ${ok.length} ok${failed > 0 ? `, ${failed} failed or invalid (left out)` : ''}`,
        `parameters: ${parameterColumns(sweep).join(', ')}`,
      ],
    }],
  });
}
