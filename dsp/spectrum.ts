/**
 * Stage 2, spectral frames: periodic-Hann windowed frames of the conditioned signal, transformed
 * once each (dsp/real-fft.ts: fft.js's realTransform with the window applied as it reads the
 * frame, into arrays owned here). Keeps the frame's power spectrum
 * and a short time average of it (for peak picking) and a local noise floor per bin.
 *
 * Power normalisation: a sine of amplitude a centred on a bin gives power a² in that bin
 * (|X|² · 4/(Σw)²); white noise of variance σ² gives 4σ² Σw²/(Σw)² = 6σ²/N per bin for the Hann
 * window (Harris 1978, "On the use of windows for harmonic analysis with the discrete Fourier
 * transform", Proc. IEEE 66(1): coherent gain 0.5, noise bandwidth 1.5 bins).
 */
import { createRealFft, realFftWindowed, type RealFft } from './real-fft';

/** Noise-equivalent bandwidth of the Hann window, bins (Harris 1978). */
export const HANN_ENBW_BINS = 1.5;

export interface SpectrumConfig {
  sampleRateHz: number;
  /** Frame length, samples (power of two ≥ 64). */
  frameSize: number;
  /** Samples between frame starts. */
  hopSize: number;
  /** Weight of the newest frame in the averaged spectrum (0-1]. */
  smoothing?: number;
  /**
   * Whether frames also fill the averaged spectrum and its prefix sums (default true); false for
   * a reader of the frame's power alone.
   */
  averaged?: boolean;
}

export interface SpectrumState {
  readonly sampleRateHz: number;
  readonly frameSize: number;
  readonly hopSize: number;
  readonly binHz: number;
  readonly binCount: number;
  readonly smoothing: number;
  readonly isAveraged: boolean;
  window: Float64Array;
  /** Double-written history of the last frameSize samples: ring[pos .. pos + N − 1], oldest first. */
  ring: Float64Array;
  pos: number;
  /** Samples since the last frame (or since the start while the first frame fills). */
  sinceFrame: number;
  /** Samples needed before the next frame is due. */
  toFrame: number;
  fft: RealFft;
  /** Transform output (interleaved re, im of bins 0 .. N/2, then scratch). */
  fftOut: Float64Array;
  powerScale: number;
  /** Power of the latest frame per bin (0 .. N/2), full-scale sine amplitude² units. */
  power: Float64Array;
  /** Exponential average of power over frames. */
  smooth: Float64Array;
  /** Prefix sums of smooth (length binCount + 1), for local floor means. */
  prefix: Float64Array;
  frameCount: number;
}

/** Creates the framing and FFT state; throws RangeError for a bad size. */
export function createSpectrumState(cfg: SpectrumConfig): SpectrumState {
  const n = cfg.frameSize;
  if (!Number.isInteger(n) || n < 64 || (n & (n - 1)) !== 0) throw new RangeError(`frameSize must be a power of two ≥ 64, got ${n}`);
  if (!Number.isInteger(cfg.hopSize) || cfg.hopSize < 1 || cfg.hopSize > n) throw new RangeError(`hopSize must be 1..frameSize, got ${cfg.hopSize}`);
  const smoothing = cfg.smoothing ?? 0.6;
  if (!(smoothing > 0 && smoothing <= 1)) throw new RangeError(`smoothing must be in (0, 1], got ${smoothing}`);
  const window = new Float64Array(n);
  let sumW = 0;
  for (let i = 0; i < n; i++) {
    // Periodic (DFT-even) Hann: the form for which the three-point interpolator is exact.
    window[i] = 0.5 - 0.5 * Math.cos((2 * Math.PI * i) / n);
    sumW += window[i];
  }
  const binCount = n / 2 + 1;
  return {
    sampleRateHz: cfg.sampleRateHz,
    frameSize: n,
    hopSize: cfg.hopSize,
    binHz: cfg.sampleRateHz / n,
    binCount,
    smoothing,
    isAveraged: cfg.averaged ?? true,
    window,
    ring: new Float64Array(2 * n),
    pos: 0,
    sinceFrame: 0,
    toFrame: n,
    fft: createRealFft(n),
    fftOut: new Float64Array(2 * n),
    powerScale: 4 / (sumW * sumW),
    power: new Float64Array(binCount),
    smooth: new Float64Array(binCount),
    prefix: new Float64Array(binCount + 1),
    frameCount: 0,
  };
}

/**
 * Appends x[start .. end) to the frame history; end − start must not exceed st.toFrame.
 * Returns true when a frame is due (call computeSpectrumFrame next).
 */
export function feedSpectrum(st: SpectrumState, x: Float32Array, start: number, end: number): boolean {
  const n = st.frameSize;
  const ring = st.ring;
  let pos = st.pos;
  // Block copies up to the end of the ring, each written twice.
  let i = start;
  while (i < end) {
    const k = Math.min(end - i, n - pos);
    const src = x.subarray(i, i + k);
    ring.set(src, pos);
    ring.set(src, pos + n);
    pos += k;
    if (pos === n) pos = 0;
    i += k;
  }
  st.pos = pos;
  st.toFrame -= end - start;
  return st.toFrame === 0;
}

/** Transforms the current frame: fills power, and (when averaged) smooth and prefix. Allocates nothing. */
export function computeSpectrumFrame(st: SpectrumState): void {
  realFftWindowed(st.fft, st.fftOut, st.ring, st.pos, st.window);
  if (!st.isAveraged) {
    const out = st.fftOut;
    const p = st.power;
    const scale = st.powerScale;
    for (let k = 0; k < st.binCount; k++) {
      const re = out[2 * k];
      const im = out[2 * k + 1];
      p[k] = (re * re + im * im) * scale;
    }
    st.frameCount++;
    st.toFrame = st.hopSize;
    return;
  }
  const out = st.fftOut;
  const p = st.power;
  const sm = st.smooth;
  const pre = st.prefix;
  const scale = st.powerScale;
  const a = st.frameCount === 0 ? 1 : st.smoothing;
  let acc = 0;
  pre[0] = 0;
  for (let k = 0; k < st.binCount; k++) {
    const re = out[2 * k];
    const im = out[2 * k + 1];
    const pk = (re * re + im * im) * scale;
    p[k] = pk;
    const s = sm[k] + a * (pk - sm[k]);
    sm[k] = s;
    acc += s;
    pre[k + 1] = acc;
  }
  st.frameCount++;
  st.toFrame = st.hopSize;
}

/** Forgets the frame history after a gap: the next frame needs a full frame of new samples. */
export function resetSpectrumFraming(st: SpectrumState): void {
  st.ring.fill(0);
  st.pos = 0;
  st.toFrame = st.frameSize;
}

/**
 * Local floor of the averaged spectrum around bin k for tonal prominence: the mean over the bins
 * inner..outer away on each side, taking the lower of the two sides, so that a second tone on
 * one side does not hide the first. Returns 0 when no bins are available.
 */
export function localFloorMean(st: SpectrumState, k: number, inner: number, outer: number, loBin: number, hiBin: number): number {
  const pre = st.prefix;
  let left = Infinity;
  let right = Infinity;
  const a0 = Math.max(loBin, k - outer);
  const a1 = Math.max(loBin, k - inner + 1);
  if (a1 - a0 >= 3) left = (pre[a1] - pre[a0]) / (a1 - a0);
  const b0 = Math.min(hiBin, k + inner);
  const b1 = Math.min(hiBin, k + outer + 1);
  if (b1 - b0 >= 3) right = (pre[b1] - pre[b0]) / (b1 - b0);
  const floor = Math.min(left, right);
  return Number.isFinite(floor) ? floor : 0;
}
