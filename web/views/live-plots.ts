/**
 * The live plots (uPlot): tone amplitude in dB against time with the fitted growth and decay lines
 * drawn over it (an exponential is a straight line there), the frequency track, and the spectrum
 * (the latest, a chosen moment, or averaged over the hum; linear or logarithmic frequency) with the
 * tracked peak marked. Legends and cursor readouts are our own lines of text under each plot.
 * They read the live buffer when `draw()` is called from requestAnimationFrame, at most about ten
 * times a second. Axis ranges come from plot-safety.ts, so any data (constant, empty, non-finite,
 * huge) draws.
 */
import uPlot from 'uplot';
import 'uplot/dist/uPlot.min.css';
import { columnAt, fitLineOf, latestTimeS, rowCount, rowIndex, trackOverview, type LiveBuffer } from '../run/live-buffer';
import { formatClock, formatDb, formatHz, MISSING } from '../format';
import { finiteExtent, layoutLabels, safeRange } from '../plot-safety';
import { el } from './dom';

export interface LivePlots {
  /** Redraws from the buffer when it changed since the last call. */
  draw(): void;
  /** Redraws now. */
  redraw(): void;
  /** Fits the plots to the width of their container. */
  resize(): void;
  destroy(): void;
}

/** Longest span of track shown, s (older rows stay in the session store, not on screen). */
const WINDOW_S = 120;
/** Levels below this are digital silence or its numerical floor, dBFS: left out of the plots. */
const FLOOR_DBFS = -160;
/** Widest level span shown below the loudest point, dB. */
const MAX_DB_SPAN = 100;
/** Rows of marker labels before a label is left out (its line stays; the marker list names it). */
const LABEL_ROWS = 3;

type SpectrumMode = 'latest' | 'moment' | 'hum';

function cssColor(name: string, fallback: string): string {
  const v = getComputedStyle(document.documentElement).getPropertyValue(name).trim();
  return v || fallback;
}

function chartWidth(host: HTMLElement): number {
  return Math.max(260, Math.floor(host.clientWidth || 360) - 14);
}

/** First index of the increasing `xs` at or after `x`. */
function lowerBound(xs: readonly number[], x: number): number {
  let lo = 0;
  let hi = xs.length;
  while (lo < hi) {
    const mid = (lo + hi) >> 1;
    if ((xs[mid] ?? 0) < x) lo = mid + 1;
    else hi = mid;
  }
  return lo;
}

/** Vertical lines at the user's markers and at gaps; labels in rows so they never overprint. */
function drawTimeMarks(u: uPlot, buffer: LiveBuffer, markColor: string, gapColor: string): void {
  const ctx = u.ctx;
  const { top, height } = u.bbox;
  const dpr = devicePixelRatio;
  ctx.save();
  ctx.lineWidth = Math.max(1, dpr * 1.5);
  const xMin = u.scales.x?.min ?? 0;
  const xMax = u.scales.x?.max ?? 0;
  ctx.setLineDash([6 * dpr, 4 * dpr]);
  ctx.strokeStyle = gapColor;
  for (const t of buffer.gapTimesS) {
    if (t < xMin || t > xMax) continue;
    const x = u.valToPos(t, 'x', true);
    ctx.beginPath();
    ctx.moveTo(x, top);
    ctx.lineTo(x, top + height);
    ctx.stroke();
  }
  ctx.setLineDash([]);
  ctx.strokeStyle = markColor;
  ctx.fillStyle = markColor;
  ctx.font = `${12 * dpr}px system-ui, sans-serif`;
  const shown = buffer.markers.filter((m) => m.timeS >= xMin && m.timeS <= xMax);
  const xs = shown.map((m) => u.valToPos(m.timeS, 'x', true));
  const rows = layoutLabels(xs.map((x) => x + 3 * dpr), shown.map((m) => ctx.measureText(m.label).width), LABEL_ROWS, 6 * dpr);
  shown.forEach((m, k) => {
    const x = xs[k] ?? 0;
    ctx.beginPath();
    ctx.moveTo(x, top);
    ctx.lineTo(x, top + height);
    ctx.stroke();
    const row = rows[k];
    if (row !== null && row !== undefined) ctx.fillText(m.label, x + 3 * dpr, top + (12 + 14 * row) * dpr);
  });
  ctx.restore();
}

/** A legend line in our words: a swatch and a name per series. */
function legend(items: [string, string, boolean][]): HTMLElement {
  return el(
    'ul',
    { className: 'plot-legend' },
    ...items.map(([name, color, isDashed]) => el('li', {}, el('span', { className: `swatch${isDashed ? ' dashed' : ''}`, attrs: { style: `border-color:${color}` } }), name)),
  );
}

/** Builds the plots inside `host` (which receives three figure elements). */
export function createLivePlots(host: HTMLElement, buffer: LiveBuffer, bandHighHz: () => number): LivePlots {
  const fg = cssColor('--fg', '#111');
  const tone = cssColor('--plot-tone', '#0050b3');
  const level = cssColor('--plot-level', '#8a8a8a');
  const growth = cssColor('--plot-growth', '#c2410c');
  const decay = cssColor('--plot-decay', '#047857');
  const mark = cssColor('--plot-mark', '#7c3aed');
  const grid = cssColor('--plot-grid', 'rgba(127,127,127,0.25)');
  const axis = (label: string): uPlot.Axis => ({ label, stroke: fg, grid: { stroke: grid, width: 1 }, ticks: { stroke: grid, width: 1 } });
  const dbRange = (_u: uPlot, lo: number, hi: number): [number, number] => safeRange(lo, hi, { fallback: [-100, 0], minSpan: 6, maxSpan: MAX_DB_SPAN });
  const hzRange = (_u: uPlot, lo: number, hi: number): [number, number] => safeRange(lo, hi, { fallback: [0, 1000], minSpan: 2 });
  const xRange = (_u: uPlot, lo: number, hi: number): [number, number] => safeRange(lo, hi, { fallback: [0, 10], minSpan: 1, pad: 0 });

  const figure = (title: string, id: string): { fig: HTMLElement; readout: HTMLElement } => {
    const readout = el('p', { className: 'plot-readout', attrs: { 'aria-live': 'off' } });
    const fig = el('figure', { className: 'plot', id }, el('figcaption', { text: title }));
    host.append(fig);
    return { fig, readout };
  };
  const amp = figure('Tone amplitude (dB re full scale) with the fitted growth and decay lines', 'plot-amplitude');
  const freq = figure('Tracked frequency (Hz)', 'plot-frequency');
  const spec = figure('Spectrum (dB re full scale)', 'plot-spectrum');
  const width = chartWidth(host);
  const height = 200;

  // Time plots: a cursor readout in words under the plot, "at 0:03.2 tone −21.6 dBFS, all −20.1 dBFS".
  let xs: number[] = [];
  let ampY: (number | null)[] = [];
  let levY: (number | null)[] = [];
  let freqY: (number | null)[] = [];
  const timeReadout = (idx: number | null | undefined): string => {
    if (idx === null || idx === undefined || idx < 0 || idx >= xs.length) return 'Touch or hover the plot to read a moment.';
    const a = ampY[idx];
    const l = levY[idx];
    const f = freqY[idx];
    return `At ${formatClock(xs[idx])}: tone ${a === null || a === undefined ? MISSING : formatDb(a, 'dBFS')}, all sound ${l === null || l === undefined ? MISSING : formatDb(l, 'dBFS')}, ${f === null || f === undefined ? 'no tone' : formatHz(f)}`;
  };
  const cursorHook = (u: uPlot): void => {
    const text = timeReadout(u.cursor.idx);
    amp.readout.textContent = text;
    freq.readout.textContent = text;
  };
  const ampPlot = new uPlot(
    {
      width,
      height,
      scales: { x: { time: false, range: xRange }, y: { range: dbRange } },
      legend: { show: false },
      cursor: { show: true, y: false, points: { show: false } },
      series: [
        { label: 'time, s' },
        { label: 'tone', stroke: tone, width: 2 },
        { label: 'all sound', stroke: level, width: 1 },
        { label: 'growth fit', stroke: growth, width: 3, dash: [8, 4] },
        { label: 'decay fit', stroke: decay, width: 3, dash: [8, 4] },
      ],
      axes: [axis('time, s'), axis('dBFS')],
      hooks: { draw: [(u) => drawTimeMarks(u, buffer, mark, level)], setCursor: [cursorHook] },
    },
    [[], [], [], [], []],
    amp.fig,
  );
  amp.fig.append(legend([['tone', tone, false], ['all sound in the band', level, false], ['growth fit', growth, true], ['decay fit', decay, true], ['markers', mark, true]]), amp.readout);
  const freqPlot = new uPlot(
    {
      width,
      height: 160,
      scales: { x: { time: false, range: xRange }, y: { range: hzRange } },
      legend: { show: false },
      cursor: { show: true, y: false, points: { show: false } },
      series: [{ label: 'time, s' }, { label: 'frequency', stroke: tone, width: 2, points: { show: false } }],
      axes: [axis('time, s'), axis('Hz')],
      hooks: { draw: [(u) => drawTimeMarks(u, buffer, mark, level)], setCursor: [cursorHook] },
    },
    [[], []],
    freq.fig,
  );
  freq.fig.append(freq.readout);
  amp.readout.textContent = timeReadout(null);
  freq.readout.textContent = timeReadout(null);

  // Spectrum: what to show, and on which frequency scale.
  const modeSelect = el(
    'select',
    { id: 'spectrum-mode', attrs: { 'aria-label': 'which spectrum' } },
    el('option', { value: 'latest', text: 'latest' }),
    el('option', { value: 'moment', text: 'the moment tapped on the spectrogram' }),
    el('option', { value: 'hum', text: 'averaged over the hum' }),
  );
  const logBox = el('input', { type: 'checkbox', id: 'spectrum-log' });
  const specControls = el('div', { className: 'plot-controls' }, el('label', { htmlFor: 'spectrum-mode', text: 'Show' }), modeSelect, el('label', { className: 'check' }, logBox, ' logarithmic frequency'));
  spec.fig.append(specControls);
  let specX: number[] = [];
  let specY: (number | null)[] = [];
  const specCursor = (u: uPlot): void => {
    const i = u.cursor.idx;
    spec.readout.textContent = i === null || i === undefined || i < 0 || i >= specX.length ? 'Touch or hover the spectrum to read a frequency.' : `${formatHz(specX[i])}: ${specY[i] === null || specY[i] === undefined ? MISSING : formatDb(specY[i] as number, 'dBFS')}`;
  };
  const makeSpecPlot = (isLog: boolean): uPlot =>
    new uPlot(
      {
        width: chartWidth(host),
        height: 180,
        scales: { x: isLog ? { time: false, distr: 3, log: 10 } : { time: false, range: hzRange }, y: { range: dbRange } },
        legend: { show: false },
        cursor: { show: true, y: false, points: { show: false } },
        series: [
          { label: 'Hz' },
          { label: 'spectrum', stroke: tone, width: 1 },
          { label: 'tracked peak', stroke: growth, width: 0, points: { show: true, size: 12, stroke: growth, fill: growth } },
        ],
        axes: [axis(isLog ? 'Hz (logarithmic)' : 'Hz'), axis('dBFS')],
        hooks: { setCursor: [specCursor] },
      },
      [[], [], []],
      spec.fig,
    );
  let specPlot = makeSpecPlot(false);
  const specLegend = legend([['spectrum', tone, false], ['tracked tone', growth, false]]);
  spec.fig.append(specLegend, spec.readout);
  spec.readout.textContent = 'Touch or hover the spectrum to read a frequency.';
  const placeSpecParts = (): void => {
    // uPlot appends its root to the figure: keep our legend and readout under it.
    spec.fig.append(specLegend, spec.readout);
  };
  logBox.addEventListener('change', () => {
    specPlot.destroy();
    specPlot = makeSpecPlot(logBox.checked);
    placeSpecParts();
    redraw();
  });
  modeSelect.addEventListener('change', () => redraw());

  let drawnVersion = -1;
  let lastDrawMs = 0;

  // Fitted lines of closed segments do not change: each is computed once.
  const fitLines = new WeakMap<object, ReturnType<typeof fitLineOf>>();
  const fitLine = (seg: (typeof buffer.segments)[number]): ReturnType<typeof fitLineOf> => {
    if (!fitLines.has(seg)) fitLines.set(seg, fitLineOf(buffer, seg));
    return fitLines.get(seg) ?? null;
  };

  function drawTrack(): void {
    // The last WINDOW_S of track, reduced to min/max per pixel column (live-buffer.ts trackOverview):
    // the cost of a redraw is the width of the plot, not the length of the record.
    const fromS = latestTimeS(buffer) - WINDOW_S;
    const o = trackOverview(buffer, fromS, Math.max(64, ampPlot.bbox.width / devicePixelRatio || chartWidth(host)), FLOOR_DBFS);
    const x = o.timeS;
    const growthLine: (number | null)[] = new Array<number | null>(x.length).fill(null);
    const decayLine: (number | null)[] = new Array<number | null>(x.length).fill(null);
    for (const seg of buffer.segments) {
      if ((seg.kind !== 'growth' && seg.kind !== 'decay') || seg.endS < fromS) continue;
      const line = fitLine(seg);
      if (!line) continue;
      const target = seg.kind === 'growth' ? growthLine : decayLine;
      for (let j = lowerBound(x, line.startS); j < x.length && (x[j] ?? 0) <= line.endS; j++) target[j] = line.interceptDb + line.slopeDbPerS * ((x[j] ?? 0) - line.startS);
    }
    xs = x;
    ampY = o.amplitudeDbfs;
    levY = o.levelDbfs;
    freqY = o.frequencyHz;
    ampPlot.setData([x, o.amplitudeDbfs, o.levelDbfs, growthLine, decayLine]);
    freqPlot.setData([x, o.frequencyHz]);
    amp.fig.dataset.markerCount = String(buffer.markers.length);
    amp.fig.dataset.fitCount = String(buffer.segments.filter((s) => (s.kind === 'growth' || s.kind === 'decay') && s.ratePerS !== null).length);
  }

  /** The spectrum of the chosen kind as (frequency, dBFS) pairs over the band. */
  function spectrumData(mode: SpectrumMode): { x: number[]; y: (number | null)[]; note: string } {
    const cols = buffer.columns;
    const [lo, hi] = buffer.columnBandHz;
    const rowsOf = (dbfs: Float32Array): { x: number[]; y: (number | null)[] } => {
      const x: number[] = [];
      const y: (number | null)[] = [];
      for (let r = 0; r < dbfs.length; r++) {
        x.push(lo * (hi / lo) ** ((r + 0.5) / dbfs.length));
        const v = dbfs[r] ?? Number.NaN;
        y.push(Number.isFinite(v) && v > FLOOR_DBFS ? v : null);
      }
      return { x, y };
    };
    if (mode === 'moment') {
      const k = columnAt(buffer, buffer.chosenTimeS);
      const c = k >= 0 ? cols[k] : undefined;
      if (!c) return { x: [], y: [], note: 'Tap the spectrogram to pick a moment.' };
      return { ...rowsOf(c.dbfs), note: `At ${formatClock(c.timeS)} (the moment tapped).` };
    }
    if (mode === 'hum') {
      // Power average of the columns inside growth and steady stretches of the main tone.
      const spans = buffer.segments.filter((s) => s.kind === 'growth' || s.kind === 'steady').map((s) => [s.startS, s.endS] as const);
      const inHum = cols.filter((c) => spans.some(([a, b]) => c.timeS >= a && c.timeS <= b));
      if (!inHum.length) return { x: [], y: [], note: 'No hum in this record yet: nothing to average.' };
      const rows = inHum[0]?.dbfs.length ?? 0;
      const mean = new Float32Array(rows);
      for (let r = 0; r < rows; r++) {
        let p = 0;
        for (const c of inHum) p += 10 ** ((c.dbfs[r] ?? -200) / 10);
        mean[r] = 10 * Math.log10(p / inHum.length);
      }
      return { ...rowsOf(mean), note: `Averaged over ${inHum.length} moments of the hum.` };
    }
    const s = buffer.spectrumDbfs;
    if (!s || !(buffer.spectrumBinHz > 0)) return { x: [], y: [], note: '' };
    const x: number[] = [];
    const y: (number | null)[] = [];
    const lastBin = Math.min(s.length - 1, Math.ceil(bandHighHz() / buffer.spectrumBinHz));
    for (let i = 1; i <= lastBin; i++) {
      x.push(i * buffer.spectrumBinHz);
      const v = s[i] ?? Number.NaN;
      y.push(Number.isFinite(v) && v > FLOOR_DBFS ? v : null);
    }
    return { x, y, note: 'Latest analysis frame.' };
  }

  function drawSpectrum(): void {
    const mode = (modeSelect.value as SpectrumMode) || 'latest';
    const { x, y, note } = spectrumData(mode);
    // The tracked tone: the point nearest the newest tracked frequency.
    const n = rowCount(buffer);
    const trackedHz = n ? buffer.frequencyHz[rowIndex(buffer, n - 1)] ?? Number.NaN : Number.NaN;
    let best = -1;
    if (Number.isFinite(trackedHz)) for (let i = 0; i < x.length; i++) if (best < 0 || Math.abs((x[i] ?? 0) - trackedHz) < Math.abs((x[best] ?? 0) - trackedHz)) best = i;
    const peak = y.map((v, i) => (i === best ? v : null));
    specX = x;
    specY = y;
    const [ylo] = finiteExtent(y);
    spec.fig.dataset.mode = mode;
    spec.fig.dataset.points = String(x.length);
    spec.fig.dataset.lowestDbfs = Number.isFinite(ylo) ? String(ylo) : '';
    specPlot.setData([x, y, peak]);
    specControls.title = note;
    spec.readout.textContent = note || 'Touch or hover the spectrum to read a frequency.';
  }

  function redraw(): void {
    drawnVersion = buffer.version;
    lastDrawMs = performance.now();
    drawTrack();
    drawSpectrum();
  }

  return {
    draw() {
      if (buffer.version === drawnVersion || performance.now() - lastDrawMs < 100) return;
      redraw();
    },
    redraw,
    resize() {
      const w = chartWidth(host);
      ampPlot.setSize({ width: w, height });
      freqPlot.setSize({ width: w, height: 160 });
      specPlot.setSize({ width: w, height: 180 });
    },
    destroy() {
      ampPlot.destroy();
      freqPlot.destroy();
      specPlot.destroy();
      host.replaceChildren();
    },
  };
}
