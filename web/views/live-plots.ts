/**
 * The live plots (uPlot): tone amplitude in dB against time with the fitted growth and decay lines
 * drawn over it (an exponential is a straight line there), the frequency track, and the spectrum
 * with the tracked peak marked. They read the live buffer when `draw()` is called from
 * requestAnimationFrame, at most about ten times a second.
 */
import uPlot from 'uplot';
import 'uplot/dist/uPlot.min.css';
import { fitLineOf, rowCount, rowIndex, type LiveBuffer } from '../run/live-buffer';

export interface LivePlots {
  /** Redraws from the buffer when it changed since the last call. */
  draw(): void;
  /** Fits the plots to the width of their container. */
  resize(): void;
  destroy(): void;
}

/** Longest span of track shown, s (older rows stay in the session store, not on screen). */
const WINDOW_S = 120;
/** Levels below this are digital silence or its numerical floor, dBFS: left out of the plots. */
const FLOOR_DBFS = -160;

function cssColor(name: string, fallback: string): string {
  const v = getComputedStyle(document.documentElement).getPropertyValue(name).trim();
  return v || fallback;
}

function chartWidth(el: HTMLElement): number {
  return Math.max(260, Math.floor(el.clientWidth || 360));
}

/** Vertical lines at the user's markers and at gaps, drawn on the plotting area of a time chart. */
function drawTimeMarks(u: uPlot, buffer: LiveBuffer, markColor: string, gapColor: string): void {
  const ctx = u.ctx;
  const { top, height } = u.bbox;
  ctx.save();
  ctx.lineWidth = Math.max(1, devicePixelRatio * 1.5);
  const xMin = u.scales.x?.min ?? 0;
  const xMax = u.scales.x?.max ?? 0;
  ctx.setLineDash([6 * devicePixelRatio, 4 * devicePixelRatio]);
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
  ctx.font = `${12 * devicePixelRatio}px system-ui, sans-serif`;
  let row = 0;
  for (const m of buffer.markers) {
    if (m.timeS < xMin || m.timeS > xMax) continue;
    const x = u.valToPos(m.timeS, 'x', true);
    ctx.beginPath();
    ctx.moveTo(x, top);
    ctx.lineTo(x, top + height);
    ctx.stroke();
    // Labels step down a line each, so neighbouring markers stay readable.
    ctx.fillText(m.label, x + 3 * devicePixelRatio, top + (12 + 14 * (row++ % 4)) * devicePixelRatio);
  }
  ctx.restore();
}

/** Builds the three plots inside `host` (which receives three figure elements). */
export function createLivePlots(host: HTMLElement, buffer: LiveBuffer, bandHighHz: () => number): LivePlots {
  const fg = cssColor('--fg', '#111');
  const tone = cssColor('--plot-tone', '#0050b3');
  const level = cssColor('--plot-level', '#8a8a8a');
  const growth = cssColor('--plot-growth', '#c2410c');
  const decay = cssColor('--plot-decay', '#047857');
  const mark = cssColor('--plot-mark', '#7c3aed');
  const grid = cssColor('--plot-grid', 'rgba(127,127,127,0.25)');
  const axis = (label: string): uPlot.Axis => ({ label, stroke: fg, grid: { stroke: grid, width: 1 }, ticks: { stroke: grid, width: 1 } });

  const figure = (title: string, id: string): HTMLElement => {
    const fig = document.createElement('figure');
    fig.className = 'plot';
    fig.id = id;
    const cap = document.createElement('figcaption');
    cap.textContent = title;
    fig.append(cap);
    host.append(fig);
    return fig;
  };
  const ampFig = figure('Tone amplitude (dB re full scale) with fitted growth and decay lines', 'plot-amplitude');
  const freqFig = figure('Tracked frequency (Hz)', 'plot-frequency');
  const specFig = figure('Spectrum (dB re full scale) with the tracked peak', 'plot-spectrum');
  const width = chartWidth(host);
  const height = 200;

  const ampPlot = new uPlot(
    {
      width,
      height,
      scales: { x: { time: false } },
      legend: { show: true, live: false },
      cursor: { show: false },
      series: [
        { label: 'time, s' },
        { label: 'tone', stroke: tone, width: 2 },
        { label: 'broadband', stroke: level, width: 1 },
        { label: 'growth fit', stroke: growth, width: 3, dash: [8, 4] },
        { label: 'decay fit', stroke: decay, width: 3, dash: [8, 4] },
      ],
      axes: [axis('time, s'), axis('dBFS')],
      hooks: { draw: [(u) => drawTimeMarks(u, buffer, mark, level)] },
    },
    [[], [], [], [], []],
    ampFig,
  );
  const freqPlot = new uPlot(
    {
      width,
      height: 160,
      scales: { x: { time: false } },
      legend: { show: false },
      cursor: { show: false },
      series: [{ label: 'time, s' }, { label: 'frequency', stroke: tone, width: 2, points: { show: false } }],
      axes: [axis('time, s'), axis('Hz')],
      hooks: { draw: [(u) => drawTimeMarks(u, buffer, mark, level)] },
    },
    [[], []],
    freqFig,
  );
  const specPlot = new uPlot(
    {
      width,
      height: 180,
      scales: { x: { time: false } },
      legend: { show: false },
      cursor: { show: false },
      series: [
        { label: 'Hz' },
        { label: 'spectrum', stroke: tone, width: 1 },
        { label: 'tracked peak', stroke: growth, width: 0, points: { show: true, size: 12, stroke: growth, fill: growth } },
      ],
      axes: [axis('Hz'), axis('dBFS')],
    },
    [[], [], []],
    specFig,
  );

  let drawnVersion = -1;
  let lastDrawMs = 0;

  function drawTrack(): void {
    const n = rowCount(buffer);
    const newest = n ? buffer.timeS[rowIndex(buffer, n - 1)] ?? 0 : 0;
    const fromS = newest - WINDOW_S;
    const x: number[] = [];
    const amp: (number | null)[] = [];
    const lev: (number | null)[] = [];
    const freq: (number | null)[] = [];
    for (let k = 0; k < n; k++) {
      const i = rowIndex(buffer, k);
      const t = buffer.timeS[i] ?? 0;
      if (t < fromS) continue;
      // uPlot needs increasing x; a gap row shares the time of the frame after it, so nudge it back.
      x.push(x.length && t <= (x[x.length - 1] ?? 0) ? (x[x.length - 1] ?? 0) + 1e-6 : t);
      const a = buffer.amplitudeDbfs[i] ?? Number.NaN;
      const l = buffer.levelDbfs[i] ?? Number.NaN;
      const f = buffer.frequencyHz[i] ?? Number.NaN;
      amp.push(Number.isFinite(a) && a > FLOOR_DBFS ? a : null);
      lev.push(Number.isFinite(l) && l > FLOOR_DBFS ? l : null);
      freq.push(Number.isFinite(f) ? f : null);
    }
    const growthLine: (number | null)[] = new Array<number | null>(x.length).fill(null);
    const decayLine: (number | null)[] = new Array<number | null>(x.length).fill(null);
    for (const seg of buffer.segments) {
      if (seg.kind !== 'growth' && seg.kind !== 'decay') continue;
      const line = fitLineOf(buffer, seg);
      if (!line) continue;
      const target = seg.kind === 'growth' ? growthLine : decayLine;
      for (let j = 0; j < x.length; j++) {
        const t = x[j] ?? 0;
        if (t >= line.startS && t <= line.endS) target[j] = line.interceptDb + line.slopeDbPerS * (t - line.startS);
      }
    }
    ampPlot.setData([x, amp, lev, growthLine, decayLine]);
    freqPlot.setData([x, freq]);
    ampFig.dataset.markerCount = String(buffer.markers.length);
    ampFig.dataset.fitCount = String(buffer.segments.filter((s) => (s.kind === 'growth' || s.kind === 'decay') && s.ratePerS !== null).length);
  }

  function drawSpectrum(): void {
    const spec = buffer.spectrumDbfs;
    if (!spec || !(buffer.spectrumBinHz > 0)) return;
    const x: number[] = [];
    const y: (number | null)[] = [];
    const peak: (number | null)[] = [];
    const n = rowCount(buffer);
    const trackedHz = n ? buffer.frequencyHz[rowIndex(buffer, n - 1)] ?? Number.NaN : Number.NaN;
    let peakBin = -1;
    if (Number.isFinite(trackedHz)) peakBin = Math.round(trackedHz / buffer.spectrumBinHz);
    const lastBin = Math.min(spec.length - 1, Math.ceil(bandHighHz() / buffer.spectrumBinHz));
    for (let i = 1; i <= lastBin; i++) {
      x.push(i * buffer.spectrumBinHz);
      const v = spec[i] ?? Number.NaN;
      y.push(Number.isFinite(v) && v > FLOOR_DBFS ? v : null);
      peak.push(i === peakBin && Number.isFinite(v) ? v : null);
    }
    specPlot.setData([x, y, peak]);
  }

  return {
    draw() {
      const now = performance.now();
      if (buffer.version === drawnVersion || now - lastDrawMs < 100) return;
      drawnVersion = buffer.version;
      lastDrawMs = now;
      drawTrack();
      drawSpectrum();
    },
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
