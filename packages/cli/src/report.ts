/**
 * Builds the HTML report of a run (and of analyses) from the collected data, with plot.ts.
 * @module
 */
import { renderReport, type Chart, type Report, type Section } from './plot.ts';
import type { Plan } from './scenario/build.ts';
import type { RunOutcome } from './runner.ts';
import { formatQuantity } from './units.ts';

/** A short y-axis label: the signal names (the chart title says what the chart is). */
function axisLabel(signals: readonly string[]): string {
  const label = signals.join(', ');
  return label.length <= 28 ? label : `${label.slice(0, 25)}...`;
}

function fmt(value: number, unit: string): string {
  if (!Number.isFinite(value)) return String(value);
  return unit === '' ? Number(value.toPrecision(6)).toString() : formatQuantity(value, unit, 5);
}

/** Groups of signals to plot: the scenario's plots, or one chart per unit. */
function plotGroups(plan: Plan): { title: string; signals: string[] }[] {
  if (plan.scenario.plots !== undefined) return plan.scenario.plots.map((p) => ({ title: p.title, signals: [...p.signals] }));
  const byUnit = new Map<string, string[]>();
  plan.record.forEach((s, i) => {
    const u = plan.units[i]!;
    byUnit.set(u, [...(byUnit.get(u) ?? []), s]);
  });
  const names: Record<string, string> = { V: 'Voltages', A: 'Currents', '': 'Other signals' };
  return [...byUnit].map(([u, signals]) => ({ title: names[u] ?? `Signals [${u}]`, signals }));
}

function waveformCharts(plan: Plan, outcome: RunOutcome, fromS: number, toS: number): Chart[] {
  const w = outcome.waveforms;
  if (w === undefined) return [];
  let i0 = 0;
  while (i0 < w.t.length && w.t[i0]! < fromS) i0++;
  let i1 = i0;
  while (i1 < w.t.length && w.t[i1]! <= toS) i1++;
  const t = w.t.slice(i0, i1);
  return plotGroups(plan).map((g) => {
    const units = new Set(g.signals.map((s) => plan.units[plan.record.indexOf(s)] ?? ''));
    const unit = units.size === 1 ? [...units][0]! : '';
    return {
      title: g.title,
      xLabel: 'time',
      xUnit: 's',
      yLabel: axisLabel(g.signals),
      ...(unit !== '' ? { yUnit: unit } : {}),
      series: g.signals
        .filter((s) => plan.record.includes(s))
        .map((s) => ({ name: s, x: t, y: w.values[plan.record.indexOf(s)]!.slice(i0, i1) })),
    };
  });
}

/** Sections describing one run: summary table, waveforms (whole window and last cycles), cycles. */
export function runSections(plan: Plan, outcome: RunOutcome): Section[] {
  const s = outcome.summary;
  const sections: Section[] = [];
  const rows: (string | number)[][] = Object.entries(s.signals).map(([name, m]) => [
    name, fmt(m.mean, m.unit), fmt(m.rms, m.unit), fmt(m.min, m.unit), fmt(m.max, m.unit), fmt(m.peakToPeak, m.unit), fmt(m.final, m.unit),
  ]);
  const notes = [
    `status: ${s.status} (${s.message})`,
    `window ${fmt(s.window.fromS, 's')} to ${fmt(s.window.toS, 's')}${s.periodS !== undefined ? `, period ${fmt(s.periodS, 's')}, ${s.cycles} cycles` : ''}`,
    `means and RMS: ${s.averaging === 'exact' ? 'exact integrals of the piecewise-linear solution' : 'trapezoidal rule on the samples'}`,
  ];
  if (s.modes !== undefined) notes.push(`conduction mode: ${s.modes.ccmCycles} CCM cycles, ${s.modes.dcmCycles} DCM cycles (last cycle ${s.modes.lastCycle})`);
  if (s.powers !== undefined) {
    for (const [name, p] of Object.entries(s.powers)) notes.push(`power ${name}: ${fmt(p.mean, 'W')} (energy ${fmt(p.energy, 'J')})`);
  }
  if (s.efficiency !== undefined) notes.push(`efficiency: ${(s.efficiency * 100).toFixed(3)} %`);
  sections.push({ heading: 'Summary', table: { columns: ['signal', 'mean', 'RMS', 'min', 'max', 'peak to peak', 'final'], rows }, notes });
  const losses = s.losses;
  if (losses !== undefined) {
    const rows: (string | number)[][] = losses.conduction.map((c) => [c.element, `conduction (${c.part})`, fmt(c.watts, 'W')]);
    for (const sw of losses.switching ?? []) {
      const parts = [['turn-on', sw.turnOnW], ['turn-off', sw.turnOffW], ['output capacitance', sw.outputCapacitanceW], ['reverse recovery', sw.reverseRecoveryW], ['gate drive', sw.gateDriveW]] as const;
      for (const [name, w] of parts) if (w > 0) rows.push([sw.device, `switching (${name})`, fmt(w, 'W')]);
    }
    sections.push({
      heading: 'Losses over the window',
      table: { columns: ['element', 'loss', 'average power'], rows },
      notes: [
        `conduction ${fmt(losses.conductionW, 'W')}${losses.switchingW !== undefined ? `, switching ${fmt(losses.switchingW, 'W')} (accounted per transition, not fed back into the circuit)` : ''}, total ${fmt(losses.totalW, 'W')}`,
        ...(losses.efficiencyWithSwitching !== undefined ? [`efficiency with switching losses: ${(100 * losses.efficiencyWithSwitching).toFixed(3)} %`] : []),
        'Conduction losses are exact integrals of the run; loads and elements named in run.powers are left out.',
      ],
    });
  }
  sections.push({ heading: 'Waveforms over the window', charts: waveformCharts(plan, outcome, s.window.fromS, s.window.toS) });
  if (s.periodS !== undefined && (s.cycles ?? 0) > 4) {
    const from = Math.max(s.window.fromS, s.window.toS - 4 * s.periodS);
    sections.push({ heading: 'Last four cycles', charts: waveformCharts(plan, outcome, from, s.window.toS) });
  }
  const c = outcome.cycles;
  if (c !== undefined && c.startS.length > 1) {
    const charts: Chart[] = plotGroups(plan).map((g): Chart => {
      const unit = plan.units[plan.record.indexOf(g.signals[0]!)] ?? '';
      return {
        title: `${g.title}: per-cycle mean, min and max`,
        xLabel: 'cycle start',
        xUnit: 's',
        yLabel: axisLabel(g.signals),
        ...(unit !== '' ? { yUnit: unit } : {}),
        series: g.signals.filter((x) => plan.record.includes(x)).flatMap((sig) => {
          const k = plan.record.indexOf(sig);
          return [
            { name: `${sig} mean`, x: c.startS, y: c.mean.map((r) => r[k]!), step: true },
            { name: `${sig} min`, x: c.startS, y: c.min.map((r) => r[k]!), step: true, dashed: true },
            { name: `${sig} max`, x: c.startS, y: c.max.map((r) => r[k]!), step: true, dashed: true },
          ];
        }),
      };
    });
    // ripple (max - min) per cycle, one chart per group of signals sharing a unit
    for (const g of plotGroups(plan)) {
      const sigs = g.signals.filter((x) => plan.record.includes(x));
      if (sigs.length === 0) continue;
      const unit = plan.units[plan.record.indexOf(sigs[0]!)] ?? '';
      charts.push({
        title: `${g.title}: ripple per cycle (max - min)`,
        xLabel: 'cycle start', xUnit: 's', yLabel: 'peak to peak',
        ...(unit !== '' ? { yUnit: unit } : {}),
        series: sigs.map((sig) => {
          const k = plan.record.indexOf(sig);
          return { name: `${sig} ripple`, x: c.startS, y: c.max.map((r, i) => r[k]! - c.min[i]![k]!), step: true };
        }),
      });
    }
    if (c.duty.length > 0) {
      charts.push({
        title: 'Duty per cycle (main switch on-time over the cycle)', xLabel: 'cycle start', xUnit: 's', yLabel: 'duty',
        series: [{ name: 'duty', x: c.startS, y: c.duty, step: true }],
      });
      charts.push({
        title: 'Switching frequency per cycle (turn-ons over the cycle length)', xLabel: 'cycle start', xUnit: 's', yLabel: 'frequency', yUnit: 'Hz',
        series: [{ name: 'switching frequency', x: c.startS, y: c.turnOns.map((n, i) => (c.spanS[i]! > 0 ? n / c.spanS[i]! : 0)), step: true }],
      });
    }
    const dcm = c.mode.filter((m) => m === 'DCM').length;
    sections.push({ heading: 'Per-cycle metrics', charts, notes: [`${c.startS.length} cycles, ${dcm} in DCM`] });
  }
  return sections;
}

/** Renders a report document. */
export function renderRunReport(plan: Plan, outcome: RunOutcome, extra: Section[] = []): string {
  const report: Report = {
    title: `edgewise: ${plan.name}`,
    ...(plan.scenario.description !== undefined ? { subtitle: plan.scenario.description } : {}),
    sections: [...runSections(plan, outcome), ...extra],
  };
  return renderReport(report);
}
