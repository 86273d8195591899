/**
 * Self-contained reports: one HTML document with inline SVG charts, no scripts, no external
 * fonts, style sheets or images (a Content-Security-Policy in the document forbids them).
 *
 * Charts have 1-2-5 linear ticks or decade log ticks, tick labels with engineering prefixes
 * when the axis has a unit, a legend, a light grid, automatic ranges with padding, and
 * min/max-per-pixel-column downsampling so long series stay small without losing peaks.
 *
 * @module
 */
import { formatQuantity } from './units.ts';

/** One line on a chart. `x` and `y` are read up to the shorter of the two lengths. */
export interface Series {
  name: string;
  x: ArrayLike<number>;
  y: ArrayLike<number>;
  /** Draw as a staircase: hold each y until the next x (for sampled or switched signals). */
  step?: boolean;
  dashed?: boolean;
}

/** A chart: a set of series against shared x and y axes. */
export interface Chart {
  title: string;
  xLabel: string;
  yLabel: string;
  /** SI unit of x; tick labels then carry engineering prefixes, e.g. `"2 us"`. */
  xUnit?: string;
  /** SI unit of y; tick labels then carry engineering prefixes, e.g. `"500 mA"`. */
  yUnit?: string;
  xLog?: boolean;
  yLog?: boolean;
  series: Series[];
  /** Total height of the SVG in pixels (default 280). */
  height?: number;
}

/** A table of values; numbers are right-aligned. */
export interface Table {
  columns: string[];
  rows: (string | number)[][];
}

/** A report section: heading, then charts stacked at one width, then a table, then notes. */
export interface Section {
  heading: string;
  charts?: Chart[];
  table?: Table;
  notes?: string[];
}

/** A whole report, rendered by {@link renderReport}. */
export interface Report {
  title: string;
  subtitle?: string;
  sections: Section[];
}

/**
 * Series colours, used in order and repeated. An own, restrained set of mid-dark tones that
 * differ in hue and lightness, readable on white and for common colour-vision deficiencies
 * when combined with the dashed style.
 */
export const PALETTE: readonly string[] = [
  '#2b5c8a', // deep blue
  '#d9822b', // amber
  '#3a8a5c', // green
  '#a23b72', // plum
  '#5a6b7b', // slate
  '#1f9aa6', // teal
  '#8c5a2b', // umber
  '#6b4fa0', // violet
];

/** Default upper bound on points drawn per series. */
export const MAX_POINTS_PER_SERIES = 4000;

/** Width of the charts in {@link renderReport}, in pixels. */
export const REPORT_CHART_WIDTH = 960;

const DEFAULT_HEIGHT = 280;
const FONT_FAMILY = 'system-ui, sans-serif';
const FONT_SIZE = 12;
const TICK_FONT_SIZE = 11;
/** Rough advance width of one character at the tick font size (no font metrics offline). */
const CHAR_WIDTH = 6.4;
const COLOURS = {
  background: '#ffffff',
  text: '#1f2933',
  muted: '#52606d',
  frame: '#b8bec6',
  grid: '#e4e7eb',
  gridMinor: '#f1f3f5',
  zero: '#c5cbd3',
};

// ---------------------------------------------------------------------------------------
// Text

// XML 1.0 section 2.2 "Characters": only these code points may appear in a document.
const INVALID_XML_CHARS = /[\u0000-\u0008\u000B\u000C\u000E-\u001F\uFFFE\uFFFF]|[\uD800-\uDBFF](?![\uDC00-\uDFFF])|(?<![\uD800-\uDBFF])[\uDC00-\uDFFF]/gu;

/**
 * Escapes text for HTML and SVG content and attribute values: `& < > " '` become character
 * references, and characters not allowed in XML 1.0 (control characters, lone surrogates)
 * become U+FFFD.
 */
export function escapeXml(text: string): string {
  return text
    .replace(INVALID_XML_CHARS, '\uFFFD')
    .replace(/[&<>"']/g, (c) => {
      switch (c) {
        case '&':
          return '&amp;';
        case '<':
          return '&lt;';
        case '>':
          return '&gt;';
        case '"':
          return '&quot;';
        default:
          return '&#39;';
      }
    });
}

// ---------------------------------------------------------------------------------------
// Ticks

/** Decimal exponent of a positive finite number, exact (from its decimal representation). */
function decimalExponent(x: number): number {
  const s = Math.abs(x).toExponential();
  return Number(s.slice(s.indexOf('e') + 1));
}

/** A tick step s × 10^e with s in {1, 2, 5}. */
interface NiceStep {
  s: 1 | 2 | 5;
  e: number;
}

function niceStep(raw: number): NiceStep {
  let e = decimalExponent(raw);
  const norm = raw / Number(`1e${e}`);
  // Pick the nice step nearest to raw on a log scale (geometric midpoints √2, √10, √50).
  if (norm < Math.SQRT2) return { s: 1, e };
  if (norm < Math.sqrt(10)) return { s: 2, e };
  if (norm < Math.sqrt(50)) return { s: 5, e };
  e += 1;
  return { s: 1, e };
}

function linearTicksWithStep(min: number, max: number, target: number): { ticks: number[]; step?: NiceStep } {
  if (!Number.isFinite(min) || !Number.isFinite(max) || max < min) return { ticks: [] };
  if (max === min) return { ticks: [min] };
  const step = niceStep((max - min) / Math.max(1, target));
  const size = step.s * Number(`1e${step.e}`);
  const first = Math.ceil(min / size - 1e-9);
  const last = Math.floor(max / size + 1e-9);
  if (!Number.isSafeInteger(first * step.s) || !Number.isSafeInteger(last * step.s) || last - first > 1000) {
    return { ticks: [] };
  }
  const ticks: number[] = [];
  // Each tick is read from a decimal literal, so 3 × 0.5e-6 gives exactly 1.5e-6.
  for (let k = first; k <= last; k++) ticks.push(k === 0 ? 0 : Number(`${k * step.s}e${step.e}`));
  return { ticks, step };
}

/**
 * Ticks for a linear axis: multiples of a 1-2-5 step (1, 2 or 5 times a power of ten) chosen
 * so that about `target` intervals span [min, max], limited to [min, max].
 * Examples: [0, 1] → 0, 0.2, …, 1; [1e-6, 3.3e-6] → 1e-6, 1.5e-6, …, 3e-6.
 * Tick values are the nearest doubles to the exact decimals (no accumulated rounding).
 * Returns `[]` for a non-finite or reversed range and `[min]` for an empty one.
 */
export function linearTicks(min: number, max: number, target = 5): number[] {
  return linearTicksWithStep(min, max, target).ticks;
}

/**
 * Ticks for a logarithmic axis over [min, max] (both positive).
 *
 * `major` are the powers of ten in range (every n-th decade if there are more than about
 * `target`); `minor` are 2…9 times each decade when every decade is shown, or the skipped
 * decades otherwise. A range holding fewer than three powers of ten falls back to 1-2-5 values
 * (and to {@link linearTicks} if even those are fewer than two).
 */
export function logTicks(min: number, max: number, target = 8): { major: number[]; minor: number[] } {
  if (!(min > 0) || !(max >= min) || !Number.isFinite(max)) return { major: [], minor: [] };
  const lo = Math.log10(min);
  const hi = Math.log10(max);
  const k0 = Math.ceil(lo - 1e-9);
  const k1 = Math.floor(hi + 1e-9);
  const inRange = (v: number): boolean => v >= min * (1 - 1e-12) && v <= max * (1 + 1e-12);
  if (k1 - k0 + 1 >= 3) {
    const stride = Math.max(1, Math.ceil((k1 - k0) / Math.max(1, target)));
    const major: number[] = [];
    const minor: number[] = [];
    for (let k = k0; k <= k1; k++) (k % stride === 0 ? major : minor).push(Number(`1e${k}`));
    if (stride === 1) {
      minor.length = 0;
      for (let k = k0 - 1; k <= k1; k++) {
        for (let m = 2; m <= 9; m++) {
          const v = Number(`${m}e${k}`);
          if (inRange(v)) minor.push(v);
        }
      }
    }
    if (major.length >= 2) return { major, minor };
  }
  const major: number[] = [];
  const minor: number[] = [];
  for (let k = Math.floor(lo) - 1; k <= Math.ceil(hi); k++) {
    for (let m = 1; m <= 9; m++) {
      const v = Number(`${m}e${k}`);
      if (inRange(v)) (m === 1 || m === 2 || m === 5 ? major : minor).push(v);
    }
  }
  if (major.length >= 2) return { major, minor };
  return { major: linearTicks(min, max, 4), minor: [] };
}

/** Formats a plain number (no unit) with the given significant digits, compactly. */
function formatPlain(value: number, digits: number): string {
  const r = Number(value.toPrecision(Math.min(17, Math.max(1, digits))));
  if (r === 0) return '0';
  const a = Math.abs(r);
  if (a >= 1e5 || a < 1e-3) return r.toExponential().replace('e+', 'e');
  return String(r);
}

/**
 * Label for a tick value: with a unit, an engineering-prefixed quantity (`"2 us"`,
 * `"500 mA"`, `"1 kHz"`); without, a plain number (`"0.25"`, `"1e-6"`). `resolution` is the
 * decimal exponent of the finest digit that must show (that of the tick step).
 */
export function formatTick(value: number, unit: string | undefined, resolution: number): string {
  if (value === 0) return unit === undefined || unit === '' ? '0' : `0 ${unit}`;
  const digits = Math.min(17, Math.max(1, decimalExponent(value) - resolution + 1));
  return unit === undefined || unit === '' ? formatPlain(value, digits) : formatQuantity(value, unit, digits);
}

// ---------------------------------------------------------------------------------------
// Downsampling

/** Options for {@link downsample}. */
export interface DownsampleOptions {
  /** Visible x range; points are grouped by the pixel column their x falls in. */
  xMin: number;
  xMax: number;
  /** Number of pixel columns across the range. */
  columns: number;
  xLog?: boolean;
  yLog?: boolean;
  /** Upper bound on the points returned (default {@link MAX_POINTS_PER_SERIES}). */
  maxPoints?: number;
}

/**
 * Reduces a series for drawing, keeping its shape and extremes.
 *
 * Points with a non-finite coordinate (or a non-positive one on a log axis) are skipped. If
 * more than `maxPoints` remain, each run of consecutive points falling in one pixel column
 * is reduced to its first, lowest, highest and last point, so every peak survives. If that
 * is still too many (x not increasing), consecutive points are grouped by index in the same
 * way. The global minimum and maximum of y are always kept.
 */
export function downsample(
  x: ArrayLike<number>,
  y: ArrayLike<number>,
  options: DownsampleOptions,
): { x: number[]; y: number[] } {
  const maxPoints = Math.max(8, options.maxPoints ?? MAX_POINTS_PER_SERIES);
  const n = Math.min(x.length, y.length);
  const valid: number[] = [];
  for (let i = 0; i < n; i++) {
    const xi = x[i] as number;
    const yi = y[i] as number;
    if (!Number.isFinite(xi) || !Number.isFinite(yi)) continue;
    if ((options.xLog === true && !(xi > 0)) || (options.yLog === true && !(yi > 0))) continue;
    valid.push(i);
  }
  let keep = valid;
  if (keep.length > maxPoints) {
    const tx = options.xLog === true ? Math.log10 : (v: number) => v;
    const t0 = tx(options.xMin);
    const span = tx(options.xMax) - t0;
    const columns = Math.max(1, Math.floor(options.columns));
    const scale = span > 0 ? columns / span : 0;
    keep = reduceGroups(keep, y, (i) => {
      const c = Math.floor((tx(x[i] as number) - t0) * scale);
      return c < 0 ? -1 : c > columns ? columns + 1 : c;
    });
  }
  if (keep.length > maxPoints) {
    const size = Math.ceil((4 * keep.length) / (maxPoints - 4));
    keep = reduceGroups(keep, y, (position) => Math.floor(position / size), true);
  }
  return { x: keep.map((i) => x[i] as number), y: keep.map((i) => y[i] as number) };
}

/**
 * Groups consecutive indices with equal keys and keeps first, min-y, max-y and last of each
 * group, in index order. With `byPosition`, the key function receives positions instead.
 */
function reduceGroups(
  indices: number[],
  y: ArrayLike<number>,
  key: (i: number) => number,
  byPosition = false,
): number[] {
  const out: number[] = [];
  let start = 0;
  while (start < indices.length) {
    const k = key(byPosition ? start : (indices[start] as number));
    let end = start + 1;
    let lo = start;
    let hi = start;
    while (end < indices.length && key(byPosition ? end : (indices[end] as number)) === k) {
      const v = y[indices[end] as number] as number;
      if (v < (y[indices[lo] as number] as number)) lo = end;
      if (v > (y[indices[hi] as number] as number)) hi = end;
      end++;
    }
    const picks = [start, lo, hi, end - 1].sort((a, b) => a - b);
    let previous = -1;
    for (const p of picks) {
      if (p !== previous) out.push(indices[p] as number);
      previous = p;
    }
    start = end;
  }
  return out;
}

// ---------------------------------------------------------------------------------------
// Axes and layout

interface Axis {
  min: number;
  max: number;
  log: boolean;
  major: number[];
  minor: number[];
  labels: string[];
}

/** Extent of the drawable points of all series along one coordinate. */
function dataExtent(chart: Chart, pick: 'x' | 'y'): [number, number] | undefined {
  let lo = Number.POSITIVE_INFINITY;
  let hi = Number.NEGATIVE_INFINITY;
  const xLog = chart.xLog === true;
  const yLog = chart.yLog === true;
  for (const s of chart.series) {
    const n = Math.min(s.x.length, s.y.length);
    const values = pick === 'x' ? s.x : s.y;
    for (let i = 0; i < n; i++) {
      const xi = s.x[i] as number;
      const yi = s.y[i] as number;
      if (!Number.isFinite(xi) || !Number.isFinite(yi) || (xLog && !(xi > 0)) || (yLog && !(yi > 0))) continue;
      const v = values[i] as number;
      if (v < lo) lo = v;
      if (v > hi) hi = v;
    }
  }
  return lo <= hi ? [lo, hi] : undefined;
}

/** Pads a data range: `fraction` of the span on each side (in decades on a log axis). */
function padRange(range: [number, number] | undefined, log: boolean, fraction: number): [number, number] {
  if (range === undefined) return log ? [1, 10] : [0, 1];
  let [lo, hi] = range;
  if (log) {
    let a = Math.log10(lo);
    let b = Math.log10(hi);
    const pad = b > a ? (b - a) * fraction : 0.5;
    a -= pad;
    b += pad;
    return [10 ** a, 10 ** b];
  }
  if (hi === lo) {
    const pad = lo === 0 ? 1 : Math.abs(lo) * 0.1;
    return [lo - pad, hi + pad];
  }
  const pad = (hi - lo) * fraction;
  lo -= pad;
  hi += pad;
  return [lo, hi];
}

function buildAxis(range: [number, number], log: boolean, unit: string | undefined, target: number): Axis {
  const [min, max] = range;
  if (log) {
    const { major, minor } = logTicks(min, max, target);
    // Decade and 1-2-5 ticks need one significant digit; linear fall-back ticks more.
    const labels = major.map((v) => {
      let digits = 1;
      while (digits < 17 && Number(v.toPrecision(digits)) !== v) digits++;
      return formatTick(v, unit, decimalExponent(v) - digits + 1);
    });
    return { min, max, log, major, minor, labels };
  }
  const { ticks, step } = linearTicksWithStep(min, max, target);
  const resolution = step === undefined ? decimalExponent(min || 1) - 3 : step.e;
  return { min, max, log, major: ticks, minor: [], labels: ticks.map((v) => formatTick(v, unit, resolution)) };
}

function textWidth(text: string): number {
  return [...text].length * CHAR_WIDTH;
}

/** Rounds a pixel coordinate to 0.1 px for compact paths. */
function px(v: number): string {
  return String(Math.round(v * 10) / 10);
}

interface Layout {
  width: number;
  height: number;
  top: number;
  left: number;
  right: number;
  bottom: number;
  legendRows: { name: string; index: number; x: number }[][];
  xAxis: Axis;
  yAxis: Axis;
  hasData: boolean;
}

const MARGIN_RIGHT = 28;
const MARGIN_BOTTOM = 46;
const TITLE_HEIGHT = 26;
const LEGEND_ROW = 18;
const SWATCH = 22;

function layoutChart(chart: Chart, width: number, minLeft: number): Layout {
  const height = Math.max(120, chart.height ?? DEFAULT_HEIGHT);
  const xLog = chart.xLog === true;
  const yLog = chart.yLog === true;
  // Legend rows, wrapped to the width available (independent of the left margin).
  const legendRows: Layout['legendRows'] = [];
  const available = width - 2 * 12;
  let row: Layout['legendRows'][number] = [];
  let cursor = 0;
  chart.series.forEach((s, index) => {
    const w = SWATCH + 6 + textWidth(s.name) + 16;
    if (row.length > 0 && cursor + w > available) {
      legendRows.push(row);
      row = [];
      cursor = 0;
    }
    row.push({ name: s.name, index, x: cursor });
    cursor += w;
  });
  if (row.length > 0) legendRows.push(row);
  const top = TITLE_HEIGHT + legendRows.length * LEGEND_ROW + 10;
  const plotHeight = Math.max(40, height - top - MARGIN_BOTTOM);
  const xData = dataExtent(chart, 'x');
  const yData = dataExtent(chart, 'y');
  // Decade labels are short and evenly spaced, so log axes take denser ticks.
  const yTarget = Math.max(2, Math.floor(plotHeight / (yLog ? 28 : 45)));
  const yAxis = buildAxis(padRange(yData, yLog, 0.05), yLog, chart.yUnit, yTarget);
  const labelWidth = Math.max(0, ...yAxis.labels.map(textWidth));
  const left = Math.max(minLeft, Math.ceil(labelWidth + 36));
  const plotWidth = Math.max(40, width - left - MARGIN_RIGHT);
  const xTarget = Math.max(2, Math.floor(plotWidth / (xLog ? 64 : 100)));
  const xAxis = buildAxis(padRange(xData, xLog, 0), xLog, chart.xUnit, xTarget);
  return {
    width,
    height: top + plotHeight + MARGIN_BOTTOM,
    top,
    left,
    right: MARGIN_RIGHT,
    bottom: MARGIN_BOTTOM,
    legendRows,
    xAxis,
    yAxis,
    hasData: xData !== undefined && yData !== undefined,
  };
}

function axisMapper(axis: Axis, from: number, to: number): (v: number) => number {
  const t = axis.log ? Math.log10 : (v: number) => v;
  const t0 = t(axis.min);
  const t1 = t(axis.max);
  const k = t1 > t0 ? (to - from) / (t1 - t0) : 0;
  return (v: number) => from + (t(v) - t0) * k;
}

// ---------------------------------------------------------------------------------------
// Rendering

function describeAxis(label: string, axis: Axis, unit: string | undefined, hasData: boolean): string {
  const scale = axis.log ? 'logarithmic' : 'linear';
  if (!hasData) return `${label} (${scale})`;
  const digits = 4;
  const show = (v: number): string =>
    unit === undefined || unit === '' ? formatPlain(v, digits) : formatQuantity(v, unit, digits);
  return `${label} (${scale}, ${show(axis.min)} to ${show(axis.max)})`;
}

function drawChart(chart: Chart, layout: Layout, idPrefix: string): string {
  const { width, height, top, left, xAxis, yAxis } = layout;
  const plotRight = width - layout.right;
  const plotBottom = height - layout.bottom;
  const mapX = axisMapper(xAxis, left, plotRight);
  const mapY = axisMapper(yAxis, plotBottom, top);
  const titleId = `${idPrefix}-title`;
  const descId = `${idPrefix}-desc`;
  const clipId = `${idPrefix}-clip`;
  const names = chart.series.map((s) => s.name).join(', ');
  const description =
    `Chart with ${chart.series.length} series${chart.series.length > 0 ? `: ${names}` : ''}. ` +
    `Horizontal axis: ${describeAxis(chart.xLabel, xAxis, chart.xUnit, layout.hasData)}. ` +
    `Vertical axis: ${describeAxis(chart.yLabel, yAxis, chart.yUnit, layout.hasData)}.`;
  const out: string[] = [];
  out.push(
    `<svg xmlns="http://www.w3.org/2000/svg" width="${width}" height="${height}" viewBox="0 0 ${width} ${height}"` +
      ` role="img" aria-labelledby="${titleId} ${descId}" font-family="${FONT_FAMILY}" font-size="${FONT_SIZE}">`,
  );
  out.push(`<title id="${titleId}">${escapeXml(chart.title)}</title>`);
  out.push(`<desc id="${descId}">${escapeXml(description)}</desc>`);
  out.push(`<rect width="${width}" height="${height}" fill="${COLOURS.background}"/>`);
  out.push(`<defs><clipPath id="${clipId}"><rect x="${left}" y="${top}" width="${plotRight - left}" height="${plotBottom - top}"/></clipPath></defs>`);
  out.push(`<text x="12" y="18" font-size="14" font-weight="600" fill="${COLOURS.text}">${escapeXml(chart.title)}</text>`);

  // Legend
  if (layout.legendRows.length > 0) {
    out.push(`<g font-size="${TICK_FONT_SIZE}" fill="${COLOURS.text}">`);
    layout.legendRows.forEach((row, r) => {
      const y = TITLE_HEIGHT + r * LEGEND_ROW + 8;
      for (const item of row) {
        const series = chart.series[item.index] as Series;
        const colour = PALETTE[item.index % PALETTE.length] as string;
        const x = 12 + item.x;
        out.push(
          `<line x1="${px(x)}" y1="${y}" x2="${px(x + SWATCH)}" y2="${y}" stroke="${colour}" stroke-width="2.5"${series.dashed === true ? ' stroke-dasharray="6 4"' : ''}/>`,
        );
        out.push(`<text x="${px(x + SWATCH + 6)}" y="${y + 4}">${escapeXml(item.name)}</text>`);
      }
    });
    out.push('</g>');
  }

  // Grid
  const grid: string[] = [];
  for (const v of xAxis.minor) grid.push(`<line x1="${px(mapX(v))}" y1="${top}" x2="${px(mapX(v))}" y2="${plotBottom}" stroke="${COLOURS.gridMinor}"/>`);
  for (const v of yAxis.minor) grid.push(`<line x1="${left}" y1="${px(mapY(v))}" x2="${plotRight}" y2="${px(mapY(v))}" stroke="${COLOURS.gridMinor}"/>`);
  for (const v of xAxis.major) grid.push(`<line x1="${px(mapX(v))}" y1="${top}" x2="${px(mapX(v))}" y2="${plotBottom}" stroke="${COLOURS.grid}"/>`);
  for (const v of yAxis.major) {
    const colour = !yAxis.log && v === 0 ? COLOURS.zero : COLOURS.grid;
    grid.push(`<line x1="${left}" y1="${px(mapY(v))}" x2="${plotRight}" y2="${px(mapY(v))}" stroke="${colour}"/>`);
  }
  out.push(`<g stroke-width="1" shape-rendering="crispEdges">${grid.join('')}</g>`);
  out.push(`<rect x="${left}" y="${top}" width="${plotRight - left}" height="${plotBottom - top}" fill="none" stroke="${COLOURS.frame}"/>`);

  // Tick labels and axis labels
  out.push(`<g font-size="${TICK_FONT_SIZE}" fill="${COLOURS.muted}">`);
  xAxis.major.forEach((v, i) => {
    out.push(`<text x="${px(mapX(v))}" y="${plotBottom + 16}" text-anchor="middle">${escapeXml(xAxis.labels[i] ?? '')}</text>`);
  });
  yAxis.major.forEach((v, i) => {
    out.push(`<text x="${left - 6}" y="${px(mapY(v) + 4)}" text-anchor="end">${escapeXml(yAxis.labels[i] ?? '')}</text>`);
  });
  out.push('</g>');
  out.push(`<text x="${px((left + plotRight) / 2)}" y="${height - 8}" text-anchor="middle" fill="${COLOURS.text}">${escapeXml(chart.xLabel)}</text>`);
  out.push(
    `<text transform="rotate(-90)" x="${px(-(top + plotBottom) / 2)}" y="14" text-anchor="middle" fill="${COLOURS.text}">${escapeXml(chart.yLabel)}</text>`,
  );

  // Series
  if (!layout.hasData) {
    out.push(`<text x="${px((left + plotRight) / 2)}" y="${px((top + plotBottom) / 2)}" text-anchor="middle" fill="${COLOURS.muted}">no data</text>`);
  }
  out.push(`<g clip-path="url(#${clipId})" fill="none" stroke-width="1.6" stroke-linejoin="round" stroke-linecap="round">`);
  chart.series.forEach((s, index) => {
    const reduced = downsample(s.x, s.y, {
      xMin: xAxis.min,
      xMax: xAxis.max,
      columns: plotRight - left,
      xLog: chart.xLog === true,
      yLog: chart.yLog === true,
    });
    const d = pathData(reduced.x, reduced.y, mapX, mapY, s.step === true);
    if (d === '') return;
    const colour = PALETTE[index % PALETTE.length] as string;
    out.push(
      `<path d="${d}" stroke="${colour}"${s.dashed === true ? ' stroke-dasharray="6 4"' : ''}><title>${escapeXml(s.name)}</title></path>`,
    );
  });
  out.push('</g>');
  out.push('</svg>');
  return out.join('\n');
}

/** SVG path data through the points (already filtered to drawable ones). */
function pathData(
  xs: number[],
  ys: number[],
  mapX: (v: number) => number,
  mapY: (v: number) => number,
  step: boolean,
): string {
  if (xs.length === 0) return '';
  const parts: string[] = [`M${px(mapX(xs[0] as number))},${px(mapY(ys[0] as number))}`];
  for (let i = 1; i < xs.length; i++) {
    const X = px(mapX(xs[i] as number));
    const Y = px(mapY(ys[i] as number));
    parts.push(step ? `H${X}V${Y}` : `L${X},${Y}`);
  }
  if (xs.length === 1) parts.push('h0'); // a single point shows as a dot (round caps)
  return parts.join('');
}

function checkWidth(width: number): number {
  if (!Number.isFinite(width) || width <= 0) {
    throw new RangeError(`chart width must be a positive number of pixels, received ${width}`);
  }
  return Math.max(240, Math.round(width));
}

/**
 * Renders one chart as a standalone SVG document fragment (`<svg xmlns=…>…</svg>`), which
 * can be written to a `.svg` file as is or placed inside HTML.
 *
 * @param chart - What to draw.
 * @param width - Width in pixels (at least 240 is used).
 * @param idPrefix - Prefix of the element ids inside the SVG (title, description, clip
 *   path); give each chart in one document a different prefix.
 * @throws RangeError if `width` is not a positive number.
 */
export function renderSvgChart(chart: Chart, width: number, idPrefix = 'ew-chart'): string {
  const w = checkWidth(width);
  return drawChart(chart, layoutChart(chart, w, 0), escapeXml(idPrefix));
}

const STYLE = `
:root { color-scheme: light; }
body { margin: 0 auto; padding: 24px; max-width: ${REPORT_CHART_WIDTH + 48}px; font-family: ${FONT_FAMILY};
  color: ${COLOURS.text}; background: #fafbfc; line-height: 1.45; }
h1 { font-size: 1.6rem; margin: 0 0 4px; }
.subtitle { color: ${COLOURS.muted}; margin: 0 0 16px; }
section { margin: 28px 0; }
h2 { font-size: 1.2rem; border-bottom: 1px solid ${COLOURS.grid}; padding-bottom: 4px; }
figure { margin: 12px 0; }
figure svg { display: block; width: 100%; height: auto; border: 1px solid ${COLOURS.grid}; border-radius: 4px; }
table { border-collapse: collapse; margin: 12px 0; font-size: 0.9rem; background: #ffffff; }
th, td { border: 1px solid ${COLOURS.grid}; padding: 4px 10px; text-align: left; }
th { background: #f0f2f5; font-weight: 600; }
td.num { text-align: right; font-variant-numeric: tabular-nums; }
.notes { color: ${COLOURS.muted}; }
`;

function renderTable(table: Table): string {
  const head = table.columns.map((c) => `<th scope="col">${escapeXml(c)}</th>`).join('');
  const body = table.rows
    .map(
      (row) =>
        `<tr>${row
          .map((cell) =>
            typeof cell === 'number' ? `<td class="num">${escapeXml(String(cell))}</td>` : `<td>${escapeXml(cell)}</td>`,
          )
          .join('')}</tr>`,
    )
    .join('\n');
  return `<table>\n<thead><tr>${head}</tr></thead>\n<tbody>\n${body}\n</tbody>\n</table>`;
}

/**
 * Renders a complete HTML document: title, optional subtitle, and per section its heading,
 * charts (stacked, all {@link REPORT_CHART_WIDTH} pixels wide and scaled to the page, with
 * plot areas aligned so stacked time axes line up), table and notes. All text is escaped; the
 * document loads nothing (no scripts, fonts, style sheets or images) and says so in its
 * Content-Security-Policy.
 */
export function renderReport(report: Report): string {
  const parts: string[] = [];
  parts.push('<!DOCTYPE html>');
  parts.push('<html lang="en">');
  parts.push('<head>');
  parts.push('<meta charset="utf-8">');
  parts.push(`<meta http-equiv="Content-Security-Policy" content="default-src 'none'; style-src 'unsafe-inline'">`);
  parts.push('<meta name="viewport" content="width=device-width, initial-scale=1">');
  parts.push(`<title>${escapeXml(report.title)}</title>`);
  parts.push(`<style>${STYLE}</style>`);
  parts.push('</head>');
  parts.push('<body>');
  parts.push('<header>');
  parts.push(`<h1>${escapeXml(report.title)}</h1>`);
  if (report.subtitle !== undefined) parts.push(`<p class="subtitle">${escapeXml(report.subtitle)}</p>`);
  parts.push('</header>');
  report.sections.forEach((section, s) => {
    parts.push('<section>');
    parts.push(`<h2>${escapeXml(section.heading)}</h2>`);
    const charts = section.charts ?? [];
    // Align plot areas of stacked charts: one left margin for the whole section.
    const layouts = charts.map((c) => layoutChart(c, REPORT_CHART_WIDTH, 0));
    const left = Math.max(0, ...layouts.map((l) => l.left));
    charts.forEach((chart, c) => {
      const svg = drawChart(chart, layoutChart(chart, REPORT_CHART_WIDTH, left), `ew-s${s}-c${c}`);
      parts.push(`<figure>\n${svg}\n</figure>`);
    });
    if (section.table !== undefined) parts.push(renderTable(section.table));
    if (section.notes !== undefined && section.notes.length > 0) {
      parts.push(`<ul class="notes">\n${section.notes.map((n) => `<li>${escapeXml(n)}</li>`).join('\n')}\n</ul>`);
    }
    parts.push('</section>');
  });
  parts.push('</body>');
  parts.push('</html>');
  return parts.join('\n') + '\n';
}
