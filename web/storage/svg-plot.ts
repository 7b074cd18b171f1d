/**
 * Small static line plots as SVG text, for the printable report (no script, no external files).
 * Every label passes through escapeXml.
 */
import { layoutLabels, safeRange } from '../plot-safety';

/** Escapes text for HTML or XML content and attribute values (the five characters of XML 1.0 §2.4/§4.6). */
export function escapeXml(text: string): string {
  return text.replace(/[&<>"']/g, (c) => (c === '&' ? '&amp;' : c === '<' ? '&lt;' : c === '>' ? '&gt;' : c === '"' ? '&quot;' : '&#39;'));
}

export interface PlotSeries {
  x: ArrayLike<number>;
  y: ArrayLike<number>;
  label: string;
  color: string;
}

export interface PlotSpec {
  title: string;
  xLabel: string;
  yLabel: string;
  series: PlotSeries[];
  /** Vertical lines (markers) at x, with a short label. */
  marks?: { x: number; label: string }[];
  widthPx?: number;
  heightPx?: number;
  /** Widest span of y shown below its highest value (dB plots: digital silence at −300 dBFS does not squash the view). */
  maxYSpan?: number;
}

/** "Nice" tick values (1, 2, 5 × 10^k) covering [lo, hi] with about `count` steps. */
export function niceTicks(lo: number, hi: number, count = 5): number[] {
  if (!(hi > lo)) return [lo];
  const raw = (hi - lo) / count;
  const mag = 10 ** Math.floor(Math.log10(raw));
  const step = [1, 2, 5, 10].map((m) => m * mag).find((s) => s >= raw) ?? 10 * mag;
  const out: number[] = [];
  for (let t = Math.ceil(lo / step) * step; t <= hi + step * 1e-9; t += step) out.push(Math.abs(t) < step * 1e-9 ? 0 : t);
  return out;
}

function tickText(t: number): string {
  const s = Math.abs(t) >= 1000 || Number.isInteger(t) ? t.toFixed(0) : t.toPrecision(3).replace(/\.?0+$/, '');
  return s.replace('-', '−');
}

/** Reduces a series to at most `columns` min/max pairs per pixel column (keeps peaks visible). */
function reduce(x: ArrayLike<number>, y: ArrayLike<number>, x0: number, x1: number, columns: number): [number, number][] {
  const n = Math.min(x.length, y.length);
  if (n <= columns * 2) {
    const out: [number, number][] = [];
    for (let i = 0; i < n; i++) out.push([x[i], y[i]]);
    return out;
  }
  const out: [number, number][] = [];
  let col = -1;
  let lo = 0;
  let hi = 0;
  let loX = 0;
  let hiX = 0;
  let has = false;
  const push = (): void => {
    if (!has) return;
    if (loX <= hiX) out.push([loX, lo], [hiX, hi]);
    else out.push([hiX, hi], [loX, lo]);
  };
  for (let i = 0; i < n; i++) {
    const c = Math.floor(((x[i] - x0) / (x1 - x0 || 1)) * columns);
    if (c !== col) {
      push();
      col = c;
      has = false;
    }
    if (!Number.isFinite(y[i])) {
      // A gap stays a gap.
      push();
      out.push([x[i], Number.NaN]);
      has = false;
      continue;
    }
    if (!has) {
      lo = hi = y[i];
      loX = hiX = x[i];
      has = true;
    } else if (y[i] < lo) {
      lo = y[i];
      loX = x[i];
    } else if (y[i] > hi) {
      hi = y[i];
      hiX = x[i];
    }
  }
  push();
  return out;
}

/** An SVG line plot with axes, ticks, legend and marker lines. NaN points break the line. */
export function svgLinePlot(spec: PlotSpec): string {
  const w = spec.widthPx ?? 680;
  const h = spec.heightPx ?? 240;
  const m = { l: 56, r: 12, t: 26, b: 40 };
  let x0 = Infinity;
  let x1 = -Infinity;
  let y0 = Infinity;
  let y1 = -Infinity;
  for (const s of spec.series) {
    for (let i = 0; i < Math.min(s.x.length, s.y.length); i++) {
      // Values beyond ±1e12 are not data a plot can show (they would squash or break the axes).
      if (!Number.isFinite(s.x[i]) || !Number.isFinite(s.y[i]) || Math.abs(s.x[i]) > 1e12 || Math.abs(s.y[i]) > 1e12) continue;
      x0 = Math.min(x0, s.x[i]);
      x1 = Math.max(x1, s.x[i]);
      y0 = Math.min(y0, s.y[i]);
      y1 = Math.max(y1, s.y[i]);
    }
  }
  const parts: string[] = [];
  parts.push(`<svg xmlns="http://www.w3.org/2000/svg" viewBox="0 0 ${w} ${h}" width="${w}" height="${h}" role="img" aria-label="${escapeXml(spec.title)}" font-family="sans-serif" font-size="11">`);
  parts.push(`<text x="${m.l}" y="16" font-size="13" font-weight="bold">${escapeXml(spec.title)}</text>`);
  if (!Number.isFinite(x0)) {
    parts.push(`<text x="${w / 2}" y="${h / 2}" text-anchor="middle">no data</text></svg>`);
    return parts.join('');
  }
  if (x1 === x0) x1 = x0 + 1;
  [y0, y1] = safeRange(y0, y1, { fallback: [0, 1], minSpan: 2, ...(spec.maxYSpan !== undefined ? { maxSpan: spec.maxYSpan } : {}) });
  const px = (x: number): number => m.l + ((x - x0) / (x1 - x0)) * (w - m.l - m.r);
  const py = (y: number): number => h - m.b - ((y - y0) / (y1 - y0)) * (h - m.t - m.b);
  parts.push(`<rect x="${m.l}" y="${m.t}" width="${w - m.l - m.r}" height="${h - m.t - m.b}" fill="none" stroke="#888"/>`);
  for (const t of niceTicks(x0, x1, 6)) {
    const X = px(t).toFixed(1);
    parts.push(`<line x1="${X}" x2="${X}" y1="${m.t}" y2="${h - m.b}" stroke="#ddd"/><text x="${X}" y="${h - m.b + 14}" text-anchor="middle">${tickText(t)}</text>`);
  }
  for (const t of niceTicks(y0, y1, 5)) {
    const Y = py(t).toFixed(1);
    parts.push(`<line x1="${m.l}" x2="${w - m.r}" y1="${Y}" y2="${Y}" stroke="#ddd"/><text x="${m.l - 4}" y="${Y}" text-anchor="end" dominant-baseline="middle">${tickText(t)}</text>`);
  }
  parts.push(`<text x="${(m.l + w - m.r) / 2}" y="${h - 6}" text-anchor="middle">${escapeXml(spec.xLabel)}</text>`);
  parts.push(`<text transform="translate(12 ${(m.t + h - m.b) / 2}) rotate(-90)" text-anchor="middle">${escapeXml(spec.yLabel)}</text>`);
  // Marker labels in rows so they never overprint (about 6 px a character at 11 px); one that fits no row keeps its line.
  const marks = (spec.marks ?? []).filter((mk) => Number.isFinite(mk.x) && mk.x >= x0 && mk.x <= x1);
  const markRows = layoutLabels(marks.map((mk) => px(mk.x) + 2), marks.map((mk) => 6 * Math.min(24, mk.label.length)), 3, 4);
  marks.forEach((mk, k) => {
    const X = px(mk.x).toFixed(1);
    const row = markRows[k];
    const label = row === null || row === undefined ? '' : `<text x="${(px(mk.x) + 2).toFixed(1)}" y="${m.t + 10 + 12 * row}" fill="#b05">${escapeXml(mk.label.slice(0, 24))}</text>`;
    parts.push(`<line x1="${X}" x2="${X}" y1="${m.t}" y2="${h - m.b}" stroke="#b05" stroke-dasharray="3 3"/>${label}`);
  });
  // Lines stay inside the plotting area when part of the data lies outside the range shown.
  const clipId = `clip-${spec.title.replace(/[^A-Za-z0-9]/g, '').slice(0, 32)}`;
  parts.push(`<clipPath id="${clipId}"><rect x="${m.l}" y="${m.t}" width="${w - m.l - m.r}" height="${h - m.t - m.b}"/></clipPath>`);
  const columns = w - m.l - m.r;
  spec.series.forEach((s, k) => {
    const pts = reduce(s.x, s.y, x0, x1, columns);
    let d = '';
    let isPenDown = false;
    for (const [x, y] of pts) {
      if (!Number.isFinite(x) || !Number.isFinite(y) || Math.abs(x) > 1e12 || Math.abs(y) > 1e12) {
        isPenDown = false;
        continue;
      }
      d += `${isPenDown ? 'L' : 'M'}${px(x).toFixed(1)} ${py(y).toFixed(1)}`;
      isPenDown = true;
    }
    if (d) parts.push(`<path d="${d}" fill="none" stroke="${escapeXml(s.color)}" stroke-width="1.4" clip-path="url(#${clipId})"/>`);
    const ly = m.t + 12 + 13 * k;
    parts.push(`<rect x="${w - m.r - 150}" y="${ly - 8}" width="10" height="3" fill="${escapeXml(s.color)}"/><text x="${w - m.r - 136}" y="${ly - 4}">${escapeXml(s.label.slice(0, 28))}</text>`);
  });
  parts.push('</svg>');
  return parts.join('');
}
