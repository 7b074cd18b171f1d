/**
 * The spectrogram: time to the right, frequency upwards on a logarithmic scale over the band, level
 * as colour from −120 to 0 dBFS, with labelled time and frequency axes. It is drawn from the
 * columns the analysis sends at a fixed step of record time, so a file analysed in a second fills
 * its whole width just as a live run does; a live run shows its last minute. Tapping it picks a
 * moment, whose spectrum the spectrum plot can show.
 */
import { columnAt, type LiveBuffer } from '../run/live-buffer';
import { niceTicks } from '../storage/svg-plot';
import { formatFixed } from '../format';
import { el } from './dom';

export interface Spectrogram {
  draw(): void;
  /** Draws now (a new run, or the final state). */
  redraw(): void;
}

/** Level range of the colour scale, dBFS. */
const FLOOR_DB = -120;
const TOP_DB = 0;
/** Span shown while listening, s (a file shows its whole record). */
const LIVE_SPAN_S = 60;
/** Plot margins in CSS px: room for the frequency labels at the left and the time labels below. */
const MARGIN = { left: 44, right: 6, top: 6, bottom: 26 };
const HEIGHT_PX = 210;
/** Frequencies labelled on the logarithmic axis (1-2-5 per decade), Hz. */
const LOG_TICKS_HZ = [10, 20, 50, 100, 200, 500, 1000, 2000, 5000, 10_000, 20_000];

/** Colour ramp (dark blue → teal → yellow → white), 256 entries of RGB, built once. */
function buildRamp(): Uint8ClampedArray {
  const stops: [number, number, number, number][] = [
    [0, 10, 18, 40],
    [0.35, 20, 90, 140],
    [0.65, 60, 180, 150],
    [0.85, 250, 220, 80],
    [1, 255, 255, 255],
  ];
  const ramp = new Uint8ClampedArray(256 * 3);
  for (let i = 0; i < 256; i++) {
    const u = i / 255;
    let k = 1;
    while (k < stops.length - 1 && (stops[k]?.[0] ?? 1) < u) k++;
    const a = stops[k - 1] ?? stops[0];
    const b = stops[k] ?? stops[stops.length - 1];
    if (!a || !b) continue;
    const f = b[0] > a[0] ? (u - a[0]) / (b[0] - a[0]) : 0;
    ramp[i * 3] = a[1] + (b[1] - a[1]) * f;
    ramp[i * 3 + 1] = a[2] + (b[2] - a[2]) * f;
    ramp[i * 3 + 2] = a[3] + (b[3] - a[3]) * f;
  }
  return ramp;
}

function hzLabel(f: number): string {
  return f >= 1000 ? `${formatFixed(f / 1000, 0)}k` : formatFixed(f, 0);
}

/** Builds the spectrogram figure inside `host`; `isWholeRecord` says whether to show all of it (a file). */
export function createSpectrogram(host: HTMLElement, buffer: LiveBuffer, isWholeRecord: () => boolean): Spectrogram {
  const cap = el('figcaption');
  const canvas = el('canvas', { className: 'spectrogram', attrs: { role: 'img', 'aria-label': 'Spectrogram: time runs left to right, frequency upwards, brighter is louder. Tap to pick a moment.' } });
  const fig = el('figure', { className: 'plot', id: 'plot-spectrogram' }, cap, canvas);
  host.append(fig);
  const ctx = canvas.getContext('2d');
  const ramp = buildRamp();
  let drawnVersion = -1;
  let lastDrawMs = 0;
  let span: [number, number] = [0, 1];

  const caption = (): void => {
    const [lo, hi] = buffer.columnBandHz;
    cap.textContent = `Spectrogram, ${formatFixed(lo, 0)}–${formatFixed(hi, 0)} Hz on a logarithmic scale (brighter = louder, ${FLOOR_DB} to ${TOP_DB} dBFS); tap a moment to see its spectrum`;
  };

  const render = (): void => {
    if (!ctx) return;
    const dpr = window.devicePixelRatio || 1;
    const widthPx = Math.max(260, Math.floor(fig.clientWidth - 12 || 360));
    if (canvas.width !== Math.round(widthPx * dpr) || canvas.height !== Math.round(HEIGHT_PX * dpr)) {
      canvas.width = Math.round(widthPx * dpr);
      canvas.height = Math.round(HEIGHT_PX * dpr);
      canvas.style.width = `${widthPx}px`;
      canvas.style.height = `${HEIGHT_PX}px`;
    }
    ctx.setTransform(1, 0, 0, 1, 0, 0);
    ctx.fillStyle = getComputedStyle(document.documentElement).getPropertyValue('--bg').trim() || '#fff';
    ctx.fillRect(0, 0, canvas.width, canvas.height);
    const x0 = Math.round(MARGIN.left * dpr);
    const y0 = Math.round(MARGIN.top * dpr);
    const w = Math.max(1, canvas.width - x0 - Math.round(MARGIN.right * dpr));
    const h = Math.max(1, canvas.height - y0 - Math.round(MARGIN.bottom * dpr));
    const cols = buffer.columns;
    const [lo, hi] = buffer.columnBandHz;
    const last = cols.length ? cols[cols.length - 1]?.timeS ?? 0 : 0;
    const first = cols.length ? cols[0]?.timeS ?? 0 : 0;
    const t1 = Math.max(last, first + 1e-3);
    const t0 = isWholeRecord() ? first : Math.max(first, t1 - LIVE_SPAN_S);
    span = [t0, t1];
    // The image: each pixel column takes the nearest column of the analysis, each pixel row the nearest row.
    const image = ctx.createImageData(w, h);
    const data = image.data;
    for (let x = 0; x < w; x++) {
      const t = t0 + ((x + 0.5) / w) * (t1 - t0);
      const c = cols.length ? cols[columnAt(buffer, t)] : undefined;
      for (let y = 0; y < h; y++) {
        let k = 0;
        if (c) {
          const row = Math.min(c.dbfs.length - 1, Math.floor(((h - 1 - y) / h) * c.dbfs.length));
          const db = c.dbfs[row] ?? FLOOR_DB;
          k = Math.round(Math.max(0, Math.min(1, (db - FLOOR_DB) / (TOP_DB - FLOOR_DB))) * 255) * 3;
        }
        const p = (y * w + x) * 4;
        data[p] = ramp[k] ?? 0;
        data[p + 1] = ramp[k + 1] ?? 0;
        data[p + 2] = ramp[k + 2] ?? 0;
        data[p + 3] = 255;
      }
    }
    ctx.putImageData(image, x0, y0);
    // Axes: frequency at the left (log), time below.
    const fg = getComputedStyle(document.documentElement).getPropertyValue('--fg').trim() || '#111';
    ctx.fillStyle = fg;
    ctx.strokeStyle = fg;
    ctx.font = `${11 * dpr}px system-ui, sans-serif`;
    ctx.textAlign = 'right';
    ctx.textBaseline = 'middle';
    const yOf = (f: number): number => y0 + h - (Math.log(f / lo) / Math.log(hi / lo)) * h;
    for (const f of LOG_TICKS_HZ) {
      if (f < lo || f > hi) continue;
      const y = yOf(f);
      ctx.fillRect(x0 - 4 * dpr, y, 4 * dpr, Math.max(1, dpr));
      ctx.fillText(hzLabel(f), x0 - 6 * dpr, y);
    }
    ctx.save();
    ctx.translate(10 * dpr, y0 + h / 2);
    ctx.rotate(-Math.PI / 2);
    ctx.textAlign = 'center';
    ctx.fillText('Hz', 0, 0);
    ctx.restore();
    ctx.textAlign = 'center';
    ctx.textBaseline = 'top';
    if (!cols.length) {
      ctx.fillText('time axis starts with the first sound', x0 + w / 2, y0 + h + 5 * dpr);
      fig.dataset.columns = '0';
      return;
    }
    for (const t of niceTicks(t0, t1, Math.max(2, Math.floor(w / (70 * dpr))))) {
      const x = x0 + ((t - t0) / (t1 - t0)) * w;
      if (!Number.isFinite(x)) continue;
      ctx.fillRect(x, y0 + h, Math.max(1, dpr), 4 * dpr);
      ctx.fillText(formatFixed(t, t1 - t0 < 5 ? 1 : 0), x, y0 + h + 5 * dpr);
    }
    ctx.textAlign = 'right';
    ctx.fillText('s', canvas.width - 2 * dpr, y0 + h + 5 * dpr);
    // The chosen moment.
    const tc = buffer.chosenTimeS;
    if (Number.isFinite(tc) && tc >= t0 && tc <= t1) {
      const x = x0 + ((tc - t0) / (t1 - t0)) * w;
      ctx.fillStyle = getComputedStyle(document.documentElement).getPropertyValue('--plot-mark').trim() || '#7c3aed';
      ctx.fillRect(x - dpr, y0, 2 * dpr, h);
    }
    fig.dataset.columns = String(cols.length);
    fig.dataset.spanS = formatFixed(t1 - t0, 2);
  };

  canvas.addEventListener('click', (ev) => {
    const rect = canvas.getBoundingClientRect();
    const x = ev.clientX - rect.left - MARGIN.left;
    const w = rect.width - MARGIN.left - MARGIN.right;
    if (!(w > 0) || x < 0 || x > w) return;
    buffer.chosenTimeS = span[0] + (x / w) * (span[1] - span[0]);
    buffer.version++;
  });

  caption();
  return {
    draw() {
      const now = performance.now();
      if (buffer.version === drawnVersion || now - lastDrawMs < 250) return;
      drawnVersion = buffer.version;
      lastDrawMs = now;
      caption();
      render();
    },
    redraw() {
      drawnVersion = -1;
      caption();
      render();
    },
  };
}
