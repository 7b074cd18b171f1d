/**
 * Charts of the session views: time plots with uPlot (amplitude in dB, frequency; several
 * sessions overlaid), and small SVG charts built element by element (rates with their 95 %
 * intervals side by side; the stability map's scatter with error bars and the path in time).
 */
import uPlot from 'uplot';
import 'uplot/dist/uPlot.min.css';
import { niceTicks } from '../storage/svg-plot';
import { cssVar, h, svg } from './session-dom';
import { layoutLabels, safeRange } from '../plot-safety';
import { formatFixed } from '../format';

export interface TimeSeries {
  label: string;
  color: string;
  x: ArrayLike<number>;
  y: ArrayLike<number>;
}

export interface TimeChartSpec {
  title: string;
  xLabel: string;
  yLabel: string;
  series: TimeSeries[];
  marks?: { x: number; label: string }[];
  heightPx?: number;
  /** Show at most this many units below the highest value (dB plots: keep −300 dBFS silence from squashing the view). */
  maxSpan?: number;
}

/** Distinct colours for overlaid sessions (colour-blind-safe set after Okabe & Ito 2008, "Color Universal Design"). */
export const SERIES_COLORS = ['#0072B2', '#D55E00', '#009E73', '#CC79A7', '#E69F00', '#56B4E9', '#000000'];

/** A uPlot time chart inside a <figure>; returns the figure and a destroy function. */
export function timeChart(spec: TimeChartSpec): { figure: HTMLElement; destroy: () => void } {
  const figure = h('figure', { className: 'plot session-plot' }, h('figcaption', { text: spec.title }));
  const fg = cssVar('--fg', '#111');
  const grid = cssVar('--plot-grid', 'rgba(127,127,127,0.25)');
  const mark = cssVar('--plot-mark', '#7c3aed');
  // Non-finite and absurd values are left out (they would blow the axis up).
  const isPlottable = (v: number): boolean => Number.isFinite(v) && Math.abs(v) < 1e12;
  const tables: uPlot.AlignedData[] = spec.series.map((s) => {
    const x: number[] = [];
    const y: (number | null)[] = [];
    for (let i = 0; i < Math.min(s.x.length, s.y.length); i++) {
      const xv = s.x[i] ?? Number.NaN;
      if (!isPlottable(xv) || (x.length && xv <= (x[x.length - 1] ?? -Infinity))) continue;
      x.push(xv);
      const yv = s.y[i] ?? Number.NaN;
      y.push(isPlottable(yv) ? yv : null);
    }
    return [x, y] as unknown as uPlot.AlignedData;
  });
  const data: uPlot.AlignedData = tables.length === 1 ? tables[0] : uPlot.join(tables);
  const axis = (label: string): uPlot.Axis => ({ label, stroke: fg, grid: { stroke: grid, width: 1 }, ticks: { stroke: grid, width: 1 } });
  const opts: uPlot.Options = {
    width: 360,
    height: spec.heightPx ?? 220,
    scales: {
      x: { time: false, range: (_u: uPlot, lo: number, hi: number): [number, number] => safeRange(lo, hi, { fallback: [0, 10], minSpan: 1, pad: 0 }) },
      y: { range: (_u: uPlot, lo: number, hi: number): [number, number] => safeRange(lo, hi, { fallback: [0, 1], minSpan: 1, ...(spec.maxSpan !== undefined ? { maxSpan: spec.maxSpan } : {}) }) },
    },
    axes: [axis(spec.xLabel), axis(spec.yLabel)],
    legend: { show: false },
    cursor: { show: true, y: false, points: { show: false } },
    series: [{ label: spec.xLabel }, ...spec.series.map((s) => ({ label: s.label, stroke: s.color, width: 1.5, spanGaps: spec.series.length > 1 }))],
    hooks: {
      draw: [
        (u: uPlot) => {
          const marks = spec.marks ?? [];
          if (!marks.length) return;
          const ctx = u.ctx;
          const { top, height } = u.bbox;
          ctx.save();
          ctx.strokeStyle = mark;
          ctx.fillStyle = mark;
          ctx.lineWidth = Math.max(1, devicePixelRatio * 1.5);
          ctx.setLineDash([6 * devicePixelRatio, 4 * devicePixelRatio]);
          ctx.font = `${12 * devicePixelRatio}px system-ui, sans-serif`;
          // Labels in rows so they never overprint; one that fits no row keeps its line only.
          const xs = marks.map((m) => u.valToPos(m.x, 'x', true));
          const labels = marks.map((m) => m.label.slice(0, 30));
          const rows = layoutLabels(xs.map((x) => x + 3 * devicePixelRatio), labels.map((t) => ctx.measureText(t).width), 3, 6 * devicePixelRatio);
          marks.forEach((_m, k) => {
            const x = xs[k] ?? Number.NaN;
            if (!Number.isFinite(x)) return;
            ctx.beginPath();
            ctx.moveTo(x, top);
            ctx.lineTo(x, top + height);
            ctx.stroke();
            const row = rows[k];
            if (row !== null && row !== undefined) ctx.fillText(labels[k] ?? '', x + 3 * devicePixelRatio, top + (12 + 14 * row) * devicePixelRatio);
          });
          ctx.restore();
        },
      ],
    },
  };
  // Our legend and cursor readout, in words, under the plot.
  const readout = h('p', { className: 'plot-readout', text: 'Touch or hover the plot to read a moment.' });
  opts.hooks = {
    ...opts.hooks,
    setCursor: [
      (u: uPlot) => {
        const i = u.cursor.idx;
        const xv = i === null || i === undefined ? undefined : u.data[0][i];
        if (xv === undefined) return;
        const parts = spec.series.map((s, k) => {
          const v = u.data[k + 1]?.[i as number];
          return `${s.label} ${typeof v === 'number' && Number.isFinite(v) ? formatFixed(v, 1) : '—'} ${spec.yLabel}`;
        });
        readout.textContent = `At ${formatFixed(xv, 2)} ${spec.xLabel.replace(/^.*\((.*)\)$/, '$1')}: ${parts.join(', ')}`;
      },
    ],
  };
  const plot = new uPlot(opts, data, figure);
  figure.append(
    h('ul', { className: 'plot-legend' }, ...spec.series.map((s) => h('li', {}, h('span', { className: 'swatch', attrs: { style: `border-color:${s.color}` } }), s.label))),
    readout,
  );
  const fit = (): void => {
    const w = Math.max(260, Math.floor(figure.clientWidth || 360) - 12);
    if (Math.abs(plot.width - w) > 2) plot.setSize({ width: w, height: opts.height });
  };
  const ro = typeof ResizeObserver !== 'undefined' ? new ResizeObserver(fit) : null;
  ro?.observe(figure);
  requestAnimationFrame(fit);
  return {
    figure,
    destroy: () => {
      ro?.disconnect();
      plot.destroy();
    },
  };
}

export interface IntervalRow {
  label: string;
  value: number | null;
  ci: [number, number] | null;
  color: string;
  /** Text shown at the right (the value with its unit and interval). */
  text: string;
}

function tickText(t: number): string {
  return (Number.isInteger(t) ? t.toFixed(0) : t.toPrecision(3).replace(/\.?0+$/, '')).replace('-', '−');
}

/** Dots with 95 % interval whiskers, one row per item, on a shared axis with zero marked. */
export function intervalChart(title: string, unit: string, rows: IntervalRow[]): SVGSVGElement {
  const w = 420;
  const rowH = 30;
  const m = { l: 96, r: 12, t: 28, b: 34 };
  const hgt = m.t + m.b + rowH * Math.max(1, rows.length);
  const vals = rows.flatMap((r) => [r.value, ...(r.ci ?? [])]).filter((v): v is number => typeof v === 'number' && Number.isFinite(v));
  let lo = Math.min(0, ...vals);
  let hi = Math.max(0, ...vals);
  if (hi === lo) hi = lo + 1;
  const pad = (hi - lo) * 0.08;
  lo -= pad;
  hi += pad;
  const fg = cssVar('--fg', '#111');
  const grid = cssVar('--plot-grid', 'rgba(127,127,127,0.3)');
  const px = (v: number): number => m.l + ((v - lo) / (hi - lo)) * (w - m.l - m.r);
  const root = svg('svg', { viewBox: `0 0 ${w} ${hgt}`, class: 'interval-chart', role: 'img', 'aria-label': title, 'font-size': 12, 'font-family': 'system-ui, sans-serif' });
  root.append(svg('text', { x: 4, y: 16, 'font-weight': 700, fill: fg }, title));
  for (const t of niceTicks(lo, hi, 5)) {
    root.append(svg('line', { x1: px(t), x2: px(t), y1: m.t, y2: hgt - m.b, stroke: t === 0 ? fg : grid, 'stroke-width': t === 0 ? 1.5 : 1 }));
    root.append(svg('text', { x: px(t), y: hgt - m.b + 16, 'text-anchor': 'middle', fill: fg }, tickText(t)));
  }
  root.append(svg('text', { x: (m.l + w - m.r) / 2, y: hgt - 4, 'text-anchor': 'middle', fill: fg }, unit));
  rows.forEach((r, k) => {
    const y = m.t + rowH * k + rowH / 2;
    root.append(svg('text', { x: m.l - 8, y: y + 4, 'text-anchor': 'end', fill: fg }, r.label.slice(0, 14)));
    if (r.value === null || !Number.isFinite(r.value)) {
      root.append(svg('text', { x: m.l + 6, y: y + 4, fill: fg }, r.text));
      return;
    }
    if (r.ci && Number.isFinite(r.ci[0]) && Number.isFinite(r.ci[1])) {
      root.append(svg('line', { x1: px(r.ci[0]), x2: px(r.ci[1]), y1: y, y2: y, stroke: r.color, 'stroke-width': 3 }));
      for (const e of r.ci) root.append(svg('line', { x1: px(e), x2: px(e), y1: y - 7, y2: y + 7, stroke: r.color, 'stroke-width': 2 }));
    }
    root.append(svg('circle', { cx: px(r.value), cy: y, r: 5.5, fill: r.color }));
    root.append(svg('title', {}, r.text));
  });
  return root;
}

export interface ScatterPoint {
  x: number;
  y: number;
  ci?: [number, number] | null;
  isFilled: boolean;
  color: string;
  title: string;
}

export interface ScatterSpec {
  title: string;
  xLabel: string;
  yLabel: string;
  points: ScatterPoint[];
  /** Join the points in their given order with thin arrows (the path of the settings in time). */
  showPath: boolean;
  vlines: { x: number; label: string; color: string }[];
  hlineAtZero: boolean;
}

/** A scatter chart with error bars, an optional path in time, and labelled vertical lines. */
export function scatterChart(spec: ScatterSpec): SVGSVGElement {
  const w = 420;
  const hgt = 280;
  const m = { l: 50, r: 10, t: 28, b: 44 };
  const xs = [...spec.points.map((p) => p.x), ...spec.vlines.map((v) => v.x)].filter(Number.isFinite);
  const ys = spec.points.flatMap((p) => [p.y, ...(p.ci ?? [])]).filter(Number.isFinite);
  if (spec.hlineAtZero) ys.push(0);
  let x0 = Math.min(...xs);
  let x1 = Math.max(...xs);
  let y0 = Math.min(...ys);
  let y1 = Math.max(...ys);
  if (!Number.isFinite(x0)) [x0, x1] = [0, 1];
  if (!Number.isFinite(y0)) [y0, y1] = [0, 1];
  if (x1 === x0) [x0, x1] = [x0 - 1, x1 + 1];
  if (y1 === y0) [y0, y1] = [y0 - 1, y1 + 1];
  const padX = (x1 - x0) * 0.06;
  const padY = (y1 - y0) * 0.08;
  x0 -= padX;
  x1 += padX;
  y0 -= padY;
  y1 += padY;
  const fg = cssVar('--fg', '#111');
  const grid = cssVar('--plot-grid', 'rgba(127,127,127,0.3)');
  const px = (v: number): number => m.l + ((v - x0) / (x1 - x0)) * (w - m.l - m.r);
  const py = (v: number): number => hgt - m.b - ((v - y0) / (y1 - y0)) * (hgt - m.t - m.b);
  const root = svg('svg', { viewBox: `0 0 ${w} ${hgt}`, class: 'scatter-chart', role: 'img', 'aria-label': spec.title, 'font-size': 12, 'font-family': 'system-ui, sans-serif' });
  const defs = svg('defs');
  const marker = svg('marker', { id: `arrow-${spec.title.length}-${spec.points.length}`, viewBox: '0 0 10 10', refX: 9, refY: 5, markerWidth: 6, markerHeight: 6, orient: 'auto-start-reverse' });
  marker.append(svg('path', { d: 'M0 0L10 5L0 10z', fill: grid }));
  defs.append(marker);
  root.append(defs);
  root.append(svg('text', { x: 4, y: 16, 'font-weight': 700, fill: fg }, spec.title));
  root.append(svg('rect', { x: m.l, y: m.t, width: w - m.l - m.r, height: hgt - m.t - m.b, fill: 'none', stroke: grid }));
  for (const t of niceTicks(x0, x1, 5)) {
    root.append(svg('line', { x1: px(t), x2: px(t), y1: m.t, y2: hgt - m.b, stroke: grid }));
    root.append(svg('text', { x: px(t), y: hgt - m.b + 16, 'text-anchor': 'middle', fill: fg }, tickText(t)));
  }
  for (const t of niceTicks(y0, y1, 5)) {
    root.append(svg('line', { x1: m.l, x2: w - m.r, y1: py(t), y2: py(t), stroke: spec.hlineAtZero && t === 0 ? fg : grid, 'stroke-width': spec.hlineAtZero && t === 0 ? 1.5 : 1 }));
    root.append(svg('text', { x: m.l - 6, y: py(t) + 4, 'text-anchor': 'end', fill: fg }, tickText(t)));
  }
  root.append(svg('text', { x: (m.l + w - m.r) / 2, y: hgt - 6, 'text-anchor': 'middle', fill: fg }, spec.xLabel));
  root.append(svg('text', { x: 14, y: (m.t + hgt - m.b) / 2, transform: `rotate(-90 14 ${(m.t + hgt - m.b) / 2})`, 'text-anchor': 'middle', fill: fg }, spec.yLabel));
  spec.vlines.forEach((v, k) => {
    root.append(svg('line', { x1: px(v.x), x2: px(v.x), y1: m.t, y2: hgt - m.b, stroke: v.color, 'stroke-width': 2, 'stroke-dasharray': '6 4' }));
    // Labels stagger downwards so close thresholds stay readable; near the right edge they sit left of the line.
    const isRight = px(v.x) > w - m.r - 70;
    root.append(svg('text', { x: px(v.x) + (isRight ? -4 : 4), y: m.t + 14 + 15 * k, fill: v.color, 'font-weight': 700, 'text-anchor': isRight ? 'end' : 'start' }, v.label));
  });
  if (spec.showPath) {
    for (let i = 1; i < spec.points.length; i++) {
      const a = spec.points[i - 1];
      const b = spec.points[i];
      root.append(svg('line', { x1: px(a.x), y1: py(a.y), x2: px(b.x), y2: py(b.y), stroke: grid, 'stroke-width': 1.2, 'marker-end': `url(#${marker.id})` }));
    }
  }
  for (const p of spec.points) {
    if (p.ci && Number.isFinite(p.ci[0]) && Number.isFinite(p.ci[1])) root.append(svg('line', { x1: px(p.x), x2: px(p.x), y1: py(p.ci[0]), y2: py(p.ci[1]), stroke: p.color, 'stroke-width': 2 }));
    const c = svg('circle', { cx: px(p.x), cy: py(p.y), r: 5.5, fill: p.isFilled ? p.color : 'none', stroke: p.color, 'stroke-width': 2 });
    c.append(svg('title', {}, p.title));
    root.append(c);
  }
  return root;
}
