import { describe, expect, it } from 'vitest';
import {
  downsample,
  escapeXml,
  formatTick,
  linearTicks,
  logTicks,
  MAX_POINTS_PER_SERIES,
  renderReport,
  renderSvgChart,
  type Chart,
  type Report,
} from '../src/plot.ts';

// HTML void elements (HTML Living Standard, section 13.1.2 "Elements", void elements).
const VOID_ELEMENTS = new Set(['area', 'base', 'br', 'col', 'embed', 'hr', 'img', 'input', 'link', 'meta', 'source', 'track', 'wbr']);

/**
 * Small well-formedness check: every start tag is closed in order, every `&` starts a
 * character reference (XML 1.0 section 4.1; we only emit these five forms) and no attribute
 * value or text holds a raw `<`. Returns the problems found (empty when well formed).
 */
function checkMarkup(markup: string): string[] {
  const problems: string[] = [];
  const stack: string[] = [];
  const tag = /<(\/?)([A-Za-z][\w:-]*)((?:\s+[\w:-]+(?:="[^"<]*")?)*)\s*(\/?)>|<!DOCTYPE html>|<|&/g;
  for (let m = tag.exec(markup); m !== null; m = tag.exec(markup)) {
    const text = m[0];
    if (text === '<!DOCTYPE html>') continue;
    if (text === '&') {
      if (!/^&(amp|lt|gt|quot|#39);/.test(markup.slice(m.index, m.index + 6))) problems.push(`bare & at ${m.index}`);
      continue;
    }
    if (text === '<') {
      problems.push(`stray < at ${m.index}: ${markup.slice(m.index, m.index + 30)}`);
      continue;
    }
    const [, closing, name = '', , selfClosing] = m;
    const lower = name.toLowerCase();
    if (closing === '/') {
      const open = stack.pop();
      if (open !== lower) problems.push(`</${name}> closes <${open ?? 'nothing'}> at ${m.index}`);
    } else if (selfClosing !== '/' && !VOID_ELEMENTS.has(lower)) {
      stack.push(lower);
      if (lower === 'style') {
        // Raw text element: skip to its end tag.
        const end = markup.indexOf('</style>', tag.lastIndex);
        tag.lastIndex = end < 0 ? markup.length : end;
      }
    }
  }
  if (stack.length > 0) problems.push(`unclosed: ${stack.join(' ')}`);
  return problems;
}

/** Text content of all `<text>` elements, in order. */
function texts(svg: string): string[] {
  return [...svg.matchAll(/<text[^>]*>([^<]*)<\/text>/g)].map((m) => m[1] ?? '');
}

/** Path data of all series paths. */
function paths(svg: string): string[] {
  return [...svg.matchAll(/<path d="([^"]*)"/g)].map((m) => m[1] ?? '');
}

/** Number of vertices in a path made of M and L commands. */
function vertexCount(d: string): number {
  return (d.match(/[ML]/g) ?? []).length;
}

describe('checkMarkup (the test helper itself)', () => {
  it('accepts balanced markup and finds the usual faults', () => {
    expect(checkMarkup('<svg><g><path d="M0,0"/></g><title>a &amp; b</title></svg>')).toEqual([]);
    expect(checkMarkup('<svg><g></svg>')).not.toEqual([]);
    expect(checkMarkup('<svg>a & b</svg>')).not.toEqual([]);
    expect(checkMarkup('<svg><text>1 < 2</text></svg>')).not.toEqual([]);
    expect(checkMarkup('<svg>')).not.toEqual([]);
  });
});

describe('escapeXml', () => {
  it('escapes the five XML special characters and replaces characters XML forbids', () => {
    expect(escapeXml(`<b>&"'`)).toBe('&lt;b&gt;&amp;&quot;&#39;');
    expect(escapeXml('µ Ω 😀')).toBe('µ Ω 😀');
    // XML 1.0 section 2.2: no C0 controls except tab, LF, CR; no lone surrogates.
    expect(escapeXml('a\u0000b\u001bc\td\ud800e')).toBe('a\uFFFDb\uFFFDc\td\uFFFDe');
  });
});

describe('linearTicks', () => {
  it('gives 1-2-5 steps with exact decimal values', () => {
    expect(linearTicks(0, 1)).toEqual([0, 0.2, 0.4, 0.6, 0.8, 1]);
    expect(linearTicks(1e-6, 3.3e-6)).toEqual([1e-6, 1.5e-6, 2e-6, 2.5e-6, 3e-6]);
    expect(linearTicks(0, 1, 10)).toEqual([0, 0.1, 0.2, 0.3, 0.4, 0.5, 0.6, 0.7, 0.8, 0.9, 1]);
    expect(linearTicks(-1, 1)).toEqual([-1, -0.5, 0, 0.5, 1]);
    expect(linearTicks(0, 12)).toEqual([0, 2, 4, 6, 8, 10, 12]);
    expect(linearTicks(0, 100)).toEqual([0, 20, 40, 60, 80, 100]);
    expect(linearTicks(3.28, 3.36, 4)).toEqual([3.28, 3.3, 3.32, 3.34, 3.36]);
    expect(linearTicks(-0.05, 1.05, 4)).toEqual([0, 0.2, 0.4, 0.6, 0.8, 1]);
    expect(linearTicks(480e3, 520e3, 4)).toEqual([480e3, 490e3, 500e3, 510e3, 520e3]);
  });

  it('handles degenerate ranges', () => {
    expect(linearTicks(2, 2)).toEqual([2]);
    expect(linearTicks(1, 0)).toEqual([]);
    expect(linearTicks(0, Number.NaN)).toEqual([]);
    expect(linearTicks(0, Number.POSITIVE_INFINITY)).toEqual([]);
  });
});

describe('logTicks', () => {
  it('puts major ticks on decades and minor ticks on 2..9 times each decade', () => {
    const { major, minor } = logTicks(10, 1e6);
    expect(major).toEqual([10, 100, 1e3, 1e4, 1e5, 1e6]);
    expect(minor.length).toBe(8 * 5);
    expect(minor.slice(0, 9)).toEqual([20, 30, 40, 50, 60, 70, 80, 90, 200]);
    expect(minor.at(-1)).toBe(9e5);
  });

  it('thins out decades over wide ranges', () => {
    expect(logTicks(1, 1e12, 4)).toEqual({ major: [1, 1e3, 1e6, 1e9, 1e12], minor: [10, 100, 1e4, 1e5, 1e7, 1e8, 1e10, 1e11] });
  });

  it('falls back to 1-2-5 values within less than two decades', () => {
    expect(logTicks(2, 8)).toEqual({ major: [2, 5], minor: [3, 4, 6, 7, 8] });
    expect(logTicks(0.8, 30).major).toEqual([1, 2, 5, 10, 20]);
    expect(logTicks(3, 4)).toEqual({ major: [3, 3.2, 3.4, 3.6, 3.8, 4], minor: [] }); // linear fall-back
    expect(logTicks(0, 10)).toEqual({ major: [], minor: [] });
  });
});

describe('formatTick', () => {
  // Prefixes: SI Brochure, 9th edition, table 7.
  it('uses engineering prefixes when the axis has a unit', () => {
    expect(formatTick(2e-6, 's', -6)).toBe('2 us');
    expect(formatTick(1.5e-6, 's', -7)).toBe('1.5 us');
    expect(formatTick(0.5, 'A', -1)).toBe('500 mA');
    expect(formatTick(1e3, 'Hz', 3)).toBe('1 kHz');
    expect(formatTick(3.32, 'V', -2)).toBe('3.32 V');
    expect(formatTick(-0.25, 'A', -2)).toBe('-250 mA');
    expect(formatTick(0, 'V', -1)).toBe('0 V');
  });

  it('prints plain numbers without a unit', () => {
    expect(formatTick(0.25, undefined, -2)).toBe('0.25');
    expect(formatTick(-150, undefined, 1)).toBe('-150');
    expect(formatTick(1e-6, undefined, -6)).toBe('1e-6');
    expect(formatTick(1e6, '', 6)).toBe('1e6');
    expect(formatTick(0, undefined, 0)).toBe('0');
  });
});

describe('downsample', () => {
  it('keeps the global minimum and maximum of a 1e6-point series', () => {
    const n = 1_000_000;
    const x = new Float64Array(n);
    const y = new Float64Array(n);
    for (let k = 0; k < n; k++) {
      x[k] = k * 1e-9;
      y[k] = Math.sin(k * 1e-3) + 0.01 * Math.sin(k * 0.37);
    }
    y[123_457] = -10;
    y[654_321] = 10;
    const out = downsample(x, y, { xMin: 0, xMax: x[n - 1]!, columns: 900 });
    expect(out.x.length).toBeLessThanOrEqual(MAX_POINTS_PER_SERIES);
    expect(out.x.length).toBeGreaterThan(900);
    expect(Math.min(...out.y)).toBe(-10);
    expect(Math.max(...out.y)).toBe(10);
    expect(out.x[out.y.indexOf(-10)]).toBe(x[123_457]);
    expect(out.x[out.y.indexOf(10)]).toBe(x[654_321]);
    // First and last points stay, and order is preserved.
    expect(out.x[0]).toBe(0);
    expect(out.x.at(-1)).toBe(x[n - 1]);
    for (let i = 1; i < out.x.length; i++) expect(out.x[i]!).toBeGreaterThan(out.x[i - 1]!);
  });

  it('keeps extremes when x is not increasing', () => {
    const n = 200_000;
    const x = new Float64Array(n);
    const y = new Float64Array(n);
    for (let k = 0; k < n; k++) {
      x[k] = (k * 7919) % n; // scrambled order
      y[k] = Math.cos(k);
    }
    y[4242] = 5;
    y[99_999] = -5;
    const out = downsample(x, y, { xMin: 0, xMax: n, columns: 800, maxPoints: 2000 });
    expect(out.x.length).toBeLessThanOrEqual(2000);
    expect(Math.max(...out.y)).toBe(5);
    expect(Math.min(...out.y)).toBe(-5);
  });

  it('returns short series unchanged and skips non-finite points', () => {
    expect(downsample([0, 1, 2], [5, 6, 7], { xMin: 0, xMax: 2, columns: 100 })).toEqual({ x: [0, 1, 2], y: [5, 6, 7] });
    expect(
      downsample([0, 1, 2, 3, 4, Number.NaN], [0, Number.NaN, 2, Number.POSITIVE_INFINITY, 4, 5], { xMin: 0, xMax: 4, columns: 100 }),
    ).toEqual({ x: [0, 2, 4], y: [0, 2, 4] });
    expect(downsample([1, 10, 100], [1, -1, 0], { xMin: 1, xMax: 100, columns: 100, yLog: true })).toEqual({ x: [1], y: [1] });
    expect(downsample([0, 1, 2], [1, 2], { xMin: 0, xMax: 2, columns: 10 })).toEqual({ x: [0, 1], y: [1, 2] });
  });
});

const timeChart: Chart = {
  title: 'Inductor current',
  xLabel: 'time',
  yLabel: 'current',
  xUnit: 's',
  yUnit: 'A',
  series: [
    { name: 'L1.current', x: [0, 2e-6, 4e-6, 6e-6, 8e-6, 10e-6], y: [0.3, 0.7, 0.3, 0.7, 0.3, 0.7] },
    { name: 'gate', x: [0, 5e-6, 10e-6], y: [0.3, 0.7, 0.3], step: true, dashed: true },
  ],
};

describe('renderSvgChart', () => {
  it('produces well-formed SVG with an accessible title and description', () => {
    const svg = renderSvgChart(timeChart, 800);
    expect(checkMarkup(svg)).toEqual([]);
    expect(svg.startsWith('<svg xmlns="http://www.w3.org/2000/svg"')).toBe(true);
    expect(svg).toContain('role="img" aria-labelledby="ew-chart-title ew-chart-desc"');
    expect(svg).toContain('<title id="ew-chart-title">Inductor current</title>');
    expect(svg).toMatch(/<desc id="ew-chart-desc">Chart with 2 series: L1.current, gate\. Horizontal axis: time \(linear, 0 s to 10 us\)\./);
    expect(svg).toContain('<title>L1.current</title>');
    expect(svg).toContain('stroke-dasharray="6 4"');
    expect(svg).toMatch(/<path d="M[\d.]+,[\d.]+H[\d.]+V[\d.]+H/); // staircase for step series
    expect(svg.split('<path ').length - 1).toBe(2);
  });

  it('labels ticks with engineering prefixes', () => {
    const labels = texts(renderSvgChart(timeChart, 800));
    for (const label of ['0 s', '2 us', '4 us', '10 us', '300 mA', '500 mA', '700 mA']) expect(labels).toContain(label);
    const bode = renderSvgChart(
      { title: 'Loop gain', xLabel: 'frequency', yLabel: 'gain', xUnit: 'Hz', xLog: true, yLog: true, series: [{ name: 'T', x: [10, 1e6], y: [1e3, 1e-2] }] },
      960,
    );
    const bodeLabels = texts(bode);
    for (const label of ['10 Hz', '100 Hz', '1 kHz', '10 kHz', '100 kHz', '1 MHz', '0.01', '1', '1000']) expect(bodeLabels).toContain(label);
    expect(checkMarkup(bode)).toEqual([]);
  });

  it('escapes all text', () => {
    const nasty = '<b>&"';
    const svg = renderSvgChart(
      { title: nasty, xLabel: nasty, yLabel: nasty, xUnit: '<s>', series: [{ name: nasty, x: [0, 1], y: [0, 1] }] },
      600,
      'id"<',
    );
    expect(checkMarkup(svg)).toEqual([]);
    expect(svg).not.toContain('<b>');
    expect(svg).toContain('&lt;b&gt;&amp;&quot;');
    expect(svg).toContain('<title>&lt;b&gt;&amp;&quot;</title>');
    expect(svg).toContain('0 &lt;s&gt;');
  });

  it('skips NaN and Infinity points instead of breaking the path', () => {
    const svg = renderSvgChart(
      {
        title: 'gaps',
        xLabel: 'x',
        yLabel: 'y',
        series: [{ name: 's', x: [0, 1, 2, 3, 4, 5], y: [0, Number.NaN, 2, Number.POSITIVE_INFINITY, Number.NEGATIVE_INFINITY, 5] }],
      },
      600,
    );
    expect(checkMarkup(svg)).toEqual([]);
    const [d] = paths(svg);
    expect(d).toMatch(/^M[\d.]+,[\d.]+L[\d.]+,[\d.]+L[\d.]+,[\d.]+$/);
    expect(svg).not.toMatch(/NaN|Infinity/);
    // The y axis spans the finite data only: 0 to 5 plus 5 % padding each side.
    expect(svg).toContain('Vertical axis: y (linear, -0.25 to 5.25)');
  });

  it('draws at most the per-series point limit for a 1e6-point series and keeps its peaks', () => {
    const n = 1_000_000;
    const x = new Float64Array(n);
    const y = new Float64Array(n);
    for (let k = 0; k < n; k++) {
      x[k] = k;
      y[k] = Math.sin(k / 5000);
    }
    y[500_000] = 3;
    const svg = renderSvgChart({ title: 'long', xLabel: 'sample', yLabel: 'v', series: [{ name: 'v', x, y }] }, 960);
    const [d = ''] = paths(svg);
    expect(vertexCount(d)).toBeLessThanOrEqual(MAX_POINTS_PER_SERIES);
    // The spike (y = 3) survives as the single topmost vertex.
    const ys = [...d.matchAll(/[ML][\d.]+,([\d.]+)/g)].map((m) => Number(m[1]));
    const top = Math.min(...ys);
    expect(ys.filter((v) => v === top)).toHaveLength(1);
    expect(svg).toContain('Vertical axis: v (linear, -1.2 to 3.2)');
  });

  it('says when there is nothing to draw', () => {
    const svg = renderSvgChart({ title: 'empty', xLabel: 'x', yLabel: 'y', series: [] }, 400);
    expect(checkMarkup(svg)).toEqual([]);
    expect(texts(svg)).toContain('no data');
    expect(paths(svg)).toEqual([]);
  });

  it('rejects an unusable width', () => {
    expect(() => renderSvgChart(timeChart, Number.NaN)).toThrow(RangeError);
    expect(() => renderSvgChart(timeChart, 0)).toThrow(RangeError);
  });
});

describe('renderReport', () => {
  const nasty = '<b>&"';
  const report: Report = {
    title: `Buck ${nasty}`,
    subtitle: '12 V to 3.3 V',
    sections: [
      {
        heading: 'Waveforms',
        charts: [
          timeChart,
          { title: 'Output voltage', xLabel: 'time', yLabel: 'voltage', xUnit: 's', yUnit: 'V', series: [{ name: 'vout', x: [0, 1e-5], y: [3.2993, 3.3012] }] },
        ],
        table: { columns: ['quantity', nasty], rows: [['ripple', 0.0019], [nasty, 3.3]] },
        notes: [`first ${nasty}`, 'second'],
      },
      { heading: 'Empty section' },
    ],
  };
  const html = renderReport(report);

  it('is a complete, well-formed, self-contained document', () => {
    expect(html.startsWith('<!DOCTYPE html>\n<html lang="en">')).toBe(true);
    expect(checkMarkup(html)).toEqual([]);
    expect(html).toContain(`content="default-src 'none'; style-src 'unsafe-inline'"`);
    expect(html).not.toMatch(/<script|<link|<img|@import|url\((?!#)/);
    // The only URL is the SVG namespace name, which is never fetched.
    expect([...html.matchAll(/https?:\/\/[^"\s]*/g)].map((m) => m[0]).every((u) => u === 'http://www.w3.org/2000/svg')).toBe(true);
    expect(html.split('<svg ').length - 1).toBe(2);
    expect(html).toContain('<td class="num">0.0019</td>');
    expect(html).toContain('<h2>Empty section</h2>');
  });

  it('escapes every piece of text', () => {
    expect(html).not.toContain('<b>');
    expect(html).toContain('<title>Buck &lt;b&gt;&amp;&quot;</title>');
    expect(html).toContain('<th scope="col">&lt;b&gt;&amp;&quot;</th>');
    expect(html).toContain('<td>&lt;b&gt;&amp;&quot;</td>');
    expect(html).toContain('<li>first &lt;b&gt;&amp;&quot;</li>');
  });

  it('gives each chart its own ids and aligns stacked plot areas', () => {
    const ids = [...html.matchAll(/ id="([^"]+)"/g)].map((m) => m[1]);
    expect(new Set(ids).size).toBe(ids.length);
    const clipXs = [...html.matchAll(/<clipPath id="[^"]+"><rect x="([\d.]+)"/g)].map((m) => m[1]);
    expect(clipXs).toHaveLength(2);
    expect(clipXs[0]).toBe(clipXs[1]);
    expect(html).toContain('width="960"');
  });
});
