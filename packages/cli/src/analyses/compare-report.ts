/**
 * Report sections of a comparison: DC point and ripple tables, Bode plots (log frequency) of
 * both responses and of their difference, and the load-step transient side by side.
 * @module
 */
import type { StepFigures } from '@edgewise/models';
import type { Chart, Section } from '../plot.ts';
import { formatQuantity } from '../units.ts';
import { modelText, type CompareResult } from './compare.ts';

function fmt(v: number | null, unit: string): string {
  if (v === null) return '';
  if (!Number.isFinite(v)) return String(v);
  return unit === '' ? Number(v.toPrecision(6)).toString() : formatQuantity(v, unit, 5);
}

/** Phase continued across the +-180 degree cut (for plotting; the JSON keeps (-180, 180]). */
function unwrap(deg: readonly number[]): number[] {
  const out: number[] = [];
  let shift = 0;
  deg.forEach((d, i) => {
    if (i > 0) {
      const prev = deg[i - 1]!;
      if (d - prev > 180) shift -= 360;
      else if (d - prev < -180) shift += 360;
    }
    out.push(d + shift);
  });
  return out;
}

/** Sections of the comparison report. */
export function compareSections(r: CompareResult): Section[] {
  const unitOf = (signal: string): string => r.units[signal] ?? '';
  const f = r.points.map((p) => p.frequencyHz);
  const bode = (title: string, yLabel: string, av: number[], sw: number[]): Chart => ({
    title, xLabel: 'frequency', xUnit: 'Hz', yLabel, xLog: true,
    series: [
      { name: 'averaged model', x: f, y: av },
      { name: 'switching circuit (sampled-data)', x: f, y: sw, dashed: true },
    ],
  });
  const inputText = r.settings.input === 'duty' || r.settings.input === 'control' ? (r.modelKind === 'peak-current' ? 'current command' : 'duty') : r.settings.input === 'line' ? 'input voltage' : 'current drawn from the output';
  const sections: Section[] = [
    {
      heading: 'DC operating point',
      table: {
        columns: ['signal', 'averaged model', 'switching circuit (period average)', 'error', 'relative error'],
        rows: Object.entries(r.dc).map(([s, v]) => [s, fmt(v.averaged, unitOf(s)), fmt(v.switching, unitOf(s)), fmt(v.error, unitOf(s)), Number.isFinite(v.relativeError) ? `${(100 * v.relativeError).toPrecision(3)} %` : '']),
      },
      notes: [
        `duty ${r.duty}, period ${fmt(r.periodS, 's')}; switching circuit at its periodic steady state (${r.steadyState.stability}, spectral radius ${r.steadyState.spectralRadius.toPrecision(4)})`,
        `conduction mode of the switching circuit: ${r.conductionMode ?? 'not judged'}`,
        ...r.warnings.map((w) => `warning: ${w}`),
      ],
    },
    {
      heading: 'Ripple (peak to peak)',
      table: {
        columns: ['signal', 'switching circuit', 'first-order estimate |dx/dt on| D T'],
        rows: Object.entries(r.ripple).map(([s, v]) => [s, fmt(v.switching, unitOf(s)), v.firstOrderEstimate === null ? '(not a state)' : fmt(v.firstOrderEstimate, unitOf(s))]),
      },
      notes: ['The averaged model has no ripple; the estimate is its straight-line (small-ripple) approximation, Erickson and Maksimovic ch. 2.'],
    },
    {
      heading: `Frequency response: ${r.settings.output} per ${inputText}`,
      charts: [
        bode('Magnitude', 'magnitude [dB]', r.points.map((p) => p.averaged.magnitudeDb), r.points.map((p) => p.switching.magnitudeDb)),
        bode('Phase', 'phase [deg]', unwrap(r.points.map((p) => p.averaged.phaseDeg)), unwrap(r.points.map((p) => p.switching.phaseDeg))),
        {
          title: 'Averaged model minus switching circuit',
          xLabel: 'frequency', xUnit: 'Hz', yLabel: 'error [dB] / [deg]', xLog: true,
          series: [
            { name: 'magnitude error [dB]', x: f, y: r.points.map((p) => p.errorDb) },
            { name: 'phase error [deg]', x: f, y: r.points.map((p) => p.errorDeg), dashed: true },
          ],
        },
      ],
      table: {
        columns: ['frequency', 'averaged [dB]', 'switching [dB]', 'error [dB]', 'averaged [deg]', 'switching [deg]', 'error [deg]'],
        rows: r.points.map((p) => [fmt(p.frequencyHz, 'Hz'), p.averaged.magnitudeDb.toFixed(3), p.switching.magnitudeDb.toFixed(3), p.errorDb.toFixed(4), p.averaged.phaseDeg.toFixed(2), p.switching.phaseDeg.toFixed(2), p.errorDeg.toFixed(3)]),
      },
      notes: [`Comparison by the models' validateAveragedModel. Switching circuit: exact small-signal response of the periodic steady state (sampled-data, Verghese, Elbuluk and Kassakian 1986); averaged model: ${modelText(r.modelKind)}.`],
    },
  ];
  const ls = r.loadStep;
  if (ls !== undefined) {
    const u = unitOf(ls.output);
    const row = (name: string, s: StepFigures): (string | number)[] => [
      name, fmt(s.initial, u), fmt(s.final, u), fmt(s.overshoot, u), fmt(s.undershoot, u), s.settlingTimeS === null ? 'not settled' : fmt(s.settlingTimeS, 's'),
    ];
    sections.push({
      heading: `Load step of ${fmt(ls.amps, 'A')} at ${fmt(ls.stepS, 's')}`,
      charts: [{
        title: `${ls.output}: averaged model and switching circuit`,
        xLabel: 'time', xUnit: 's', yLabel: ls.output, yUnit: u,
        series: [
          { name: 'averaged model (cycle averages)', x: ls.timesS, y: ls.averaged },
          { name: 'switching circuit (cycle averages)', x: ls.timesS, y: ls.switchingAverage, dashed: true },
        ],
      }],
      table: { columns: ['response', 'before', 'final', 'overshoot', 'undershoot', 'settling (2 % band)'], rows: [row('averaged model', ls.figures.averaged), row('switching circuit (cycle averages)', ls.figures.switching)] },
      notes: [`largest difference between the averaged model and the per-cycle averages after the step: ${fmt(ls.maxDeviation, u)}`],
    });
  }
  return sections;
}
