/**
 * A scrolling spectrogram on a canvas: one column per new spectrum (about 15 a second), newest
 * at the right, frequency upwards (logarithmic) over the band of interest, level as colour from −120 to 0 dBFS.
 * The column image is allocated once; drawing a column shifts the canvas and writes one strip.
 */
import type { LiveBuffer } from '../run/live-buffer';

export interface Spectrogram {
  draw(): void;
  clear(): void;
}

/** Level range of the colour scale, dBFS. */
const FLOOR_DB = -120;
const TOP_DB = 0;
/** Canvas height in canvas pixels (one row per frequency step). */
const ROWS = 180;

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

/** Builds the spectrogram figure inside `host`. `bandHz` gives the frequency range shown. */
export function createSpectrogram(host: HTMLElement, buffer: LiveBuffer, bandHz: () => [number, number]): Spectrogram {
  const fig = document.createElement('figure');
  fig.className = 'plot';
  fig.id = 'plot-spectrogram';
  const cap = document.createElement('figcaption');
  fig.append(cap);
  const canvas = document.createElement('canvas');
  canvas.className = 'spectrogram';
  canvas.height = ROWS;
  canvas.width = 480;
  canvas.setAttribute('role', 'img');
  canvas.setAttribute('aria-label', 'Spectrogram: time runs left to right, frequency upwards, brighter is louder.');
  fig.append(canvas);
  host.append(fig);
  const ctx = canvas.getContext('2d');
  const column = ctx ? ctx.createImageData(1, ROWS) : null;
  const ramp = buildRamp();
  let drawnCount = 0;

  const caption = (): void => {
    const [lo, hi] = bandHz();
    cap.textContent = `Spectrogram: ${lo}–${hi} Hz upwards on a logarithmic scale, newest at the right (brighter = louder)`;
  };
  caption();

  return {
    draw() {
      if (!ctx || !column || buffer.spectrumCount === drawnCount || !buffer.spectrumDbfs || !(buffer.spectrumBinHz > 0)) return;
      drawnCount = buffer.spectrumCount;
      const spec = buffer.spectrumDbfs;
      const [lo, hi] = bandHz();
      // Shift everything one column left, then write the new column at the right edge.
      ctx.drawImage(canvas, -1, 0);
      const data = column.data;
      for (let row = 0; row < ROWS; row++) {
        // Logarithmic frequency axis: hums sit low in a wide band, where a linear axis would crush them.
        const freqHz = Math.max(lo, 1) * (hi / Math.max(lo, 1)) ** ((ROWS - 1 - row) / (ROWS - 1));
        const bin = Math.min(spec.length - 1, Math.max(0, Math.round(freqHz / buffer.spectrumBinHz)));
        const db = spec[bin] ?? FLOOR_DB;
        const u = Number.isFinite(db) ? Math.max(0, Math.min(1, (db - FLOOR_DB) / (TOP_DB - FLOOR_DB))) : 0;
        const k = Math.round(u * 255) * 3;
        data[row * 4] = ramp[k] ?? 0;
        data[row * 4 + 1] = ramp[k + 1] ?? 0;
        data[row * 4 + 2] = ramp[k + 2] ?? 0;
        data[row * 4 + 3] = 255;
      }
      ctx.putImageData(column, canvas.width - 1, 0);
    },
    clear() {
      drawnCount = buffer.spectrumCount;
      caption();
      if (ctx) {
        ctx.fillStyle = `rgb(${ramp[0]},${ramp[1]},${ramp[2]})`;
        ctx.fillRect(0, 0, canvas.width, canvas.height);
      }
    },
  };
}
