/**
 * Quiet stretches for noise-driven damping (docs/DESIGN.md "Quiet store", stage 7): while no tone
 * is active the conditioned samples are kept (up to QUIET_STORE_S); when a tone becomes active, or
 * at a gap or the end, the stretch is closed and the most prominent resonance of its averaged
 * spectrum is handed to dsp/damping.ts. The averaged spectrum is that of the analysis's own
 * frames lying in the stretch: their power spectra are summed as they leave the frame history
 * (dsp/history.ts), so the search transforms nothing again unless the stretch outgrew the store
 * or closed further back than the history reaches.
 */
import { estimateNoiseDrivenDamping } from './damping';
import { readRing, writeRing, type History } from './history';
import { realFftWindowed } from './real-fft';
import { localFloorMean, type SpectrumState } from './spectrum';
import type { NoiseDriven } from './types';

/** Quiet-stretch store: cap and minimum useful length, s. */
const QUIET_STORE_S = 120;
const QUIET_MIN_S = 10;
/** Margin kept out of a quiet stretch after a decay, s (the tail at 5 1/s is 43 dB down after 1 s). */
export const QUIET_AFTER_DECAY_S = 1.5;
/** Margin kept out of a quiet stretch before a growth, s. */
export const QUIET_GUARD_S = 0.5;
/** Prominence of a resonance in the long-averaged quiet spectrum, dB. */
const RESONANCE_MIN_DB = 3;
/** Resonances are searched this far inside the band edges, Hz, and within this many Hz of the peak for the damping fit. */
const RESONANCE_EDGE_HZ = 25;
const RESONANCE_SEARCH_HALF_WIDTH_HZ = 20;

export interface QuietStore {
  ring: Float32Array;
  startJ: number;
  isOpen: boolean;
  analysisRateHz: number;
  results: NoiseDriven[];
  /** The analysis's frame grid: frame length and hop (samples), the latest frame's index and end (global analysis index). */
  frameSize: number;
  hopSize: number;
  lastFrame: number;
  lastFrameEndJ: number;
  /** Sum of the power spectra of the open stretch's frames [sumFrom, sumTo) (empty when equal). */
  frameSum: Float64Array;
  sumFrom: number;
  sumTo: number;
}

/** A quiet store at analysisRateHz for the analysis's frames (`spec`: length, hop and bins). */
export function createQuietStore(analysisRateHz: number, spec: { frameSize: number; hopSize: number; binCount: number }): QuietStore {
  return {
    ring: new Float32Array(Math.ceil(QUIET_STORE_S * analysisRateHz)),
    startJ: 0,
    isOpen: true,
    analysisRateHz,
    results: [],
    frameSize: spec.frameSize,
    hopSize: spec.hopSize,
    lastFrame: -1,
    lastFrameEndJ: 0,
    frameSum: new Float64Array(spec.binCount),
    sumFrom: 0,
    sumTo: 0,
  };
}

/** Adds a frame's power spectrum to `sum` up to bin hiBin (the resonance search reads no further). */
function addFrame(sum: Float64Array, power: Float32Array, hiBin: number): void {
  const bins = Math.min(sum.length, hiBin + 1);
  for (let k = 0; k < bins; k++) sum[k] += power[k];
}

/** Start (global analysis index) of frame f; valid for frames since the latest gap. */
function frameStartJ(qs: QuietStore, f: number): number {
  return qs.lastFrameEndJ - (qs.lastFrame - f) * qs.hopSize - qs.frameSize;
}

/**
 * Notes frame frameIdx (just stored in the history, ending at global analysis index frameEndJ):
 * the frame about to leave the history is added to the open stretch's sum when it lies in the
 * stretch. Call at every frame, before the stretch is closed or opened.
 */
export function stepQuietFrame(qs: QuietStore, hist: History, frameIdx: number, frameEndJ: number): void {
  qs.lastFrame = frameIdx;
  qs.lastFrameEndJ = frameEndJ;
  if (!qs.isOpen) return;
  const held = hist.frameRing.length;
  const f = frameIdx - held + 1;
  if (f < 0 || f < hist.frameFloor || frameStartJ(qs, f) < qs.startJ) return;
  const sum = qs.frameSum;
  if (qs.sumTo === qs.sumFrom) {
    sum.fill(0);
    qs.sumFrom = f;
  }
  addFrame(sum, hist.frameRing[f % held], hist.hiBin);
  qs.sumTo = f + 1;
}

/** Keeps conditioned samples x[from, to) starting at global analysis index j0 while a stretch is open. */
export function stepQuietStore(qs: QuietStore, x: Float32Array, from: number, to: number, j0: number): void {
  if (!qs.isOpen) return;
  const cap = qs.ring.length;
  writeRing(qs.ring, x, from, to, j0);
  const j = j0 + (to - from);
  if (qs.startJ < j - cap) qs.startJ = j - cap;
}

/** Opens a quiet stretch at global analysis index j. */
export function openQuietStretch(qs: QuietStore, j: number): void {
  qs.isOpen = true;
  qs.startJ = j;
  qs.sumFrom = 0;
  qs.sumTo = 0;
}

/** Where and what the search for a resonance may look at. */
export interface ResonanceContext {
  spec: SpectrumState;
  loBin: number;
  hiBin: number;
  bandHighHz: number;
  /** Frequencies of lines sounding steadily (mains hum, a steady tone): not resonances, Hz. */
  steadyHz: number[];
}

/**
 * Closes the open quiet stretch at global analysis index jEnd and estimates noise-driven damping
 * at its resonance; startS/endS come from timeOf (s of an analysis index). Warnings are appended.
 * `onStretch` receives the stretch, its resonance and first index (the growth rate from noise).
 * `hist` holds the latest frames (those not yet summed).
 */
export function closeQuietStretch(
  qs: QuietStore,
  jEnd: number,
  hist: History,
  ctx: ResonanceContext,
  timeOf: (j: number) => number,
  warnings: string[],
  onStretch?: (x: Float32Array, centreHz: number, j0: number) => void,
): void {
  if (!qs.isOpen) return;
  qs.isOpen = false;
  const cap = qs.ring.length;
  const j0 = Math.max(qs.startJ, jEnd - cap);
  const len = jEnd - j0;
  if (len < QUIET_MIN_S * qs.analysisRateHz) return;
  const centre = findResonance(ctx, stretchSpectrum(qs, hist, ctx.spec, j0, jEnd));
  if (centre === null) return;
  const x = readRing(qs.ring, j0, len);
  onStretch?.(x, centre, j0);
  const r = estimateNoiseDrivenDamping(x, qs.analysisRateHz, { centreHz: centre, searchHalfWidthHz: RESONANCE_SEARCH_HALF_WIDTH_HZ });
  if (!r.combined.isValid) {
    warnings.push(`noise-driven damping near ${centre.toFixed(1)} Hz not estimated: ${r.combined.reason ?? 'fit failed'}`);
    return;
  }
  const entry: NoiseDriven = {
    startS: Math.max(0, timeOf(j0)),
    endS: timeOf(jEnd - 1),
    frequencyHz: Number.isFinite(r.frequencyHz) ? r.frequencyHz : centre,
    decayRatePerS: r.combined.decayRatePerS,
    decayRateCi95PerS: r.combined.ci95PerS,
  };
  if (r.lorentzian.isValid) {
    entry.lorentzianDecayRatePerS = r.lorentzian.decayRatePerS;
    entry.lorentzianCi95PerS = r.lorentzian.ci95PerS;
  }
  if (r.autocorrelation.isValid) {
    entry.autocorrelationDecayRatePerS = r.autocorrelation.decayRatePerS;
    entry.autocorrelationCi95PerS = r.autocorrelation.ci95PerS;
  }
  qs.results.push(entry);
}

/** Summed power spectrum of the analysis frames lying wholly in a stretch, and how many. */
interface StretchSpectrum {
  sum: Float64Array;
  frames: number;
}

/**
 * The summed power spectrum of the frames lying wholly in the stretch [j0, jEnd): the store's sum
 * plus the frames still in the history; when the sum holds a frame outside the stretch (the
 * stretch outgrew the store, or closed further back than the history reaches) the frames are
 * transformed again from the store's samples, as the spectrum stage does (the same numbers: the
 * power of dsp/spectrum.ts, kept as float32 like the history's frames).
 */
function stretchSpectrum(qs: QuietStore, hist: History, spec: SpectrumState, j0: number, jEnd: number): StretchSpectrum {
  const n = qs.frameSize;
  const hop = qs.hopSize;
  const last = qs.lastFrame;
  const first = last - Math.floor((qs.lastFrameEndJ - n - j0) / hop);
  const end = Math.min(last, last - Math.ceil((qs.lastFrameEndJ - jEnd) / hop));
  const frames = Math.max(0, end - first + 1);
  const sum = qs.frameSum;
  const isSummed = qs.sumTo > qs.sumFrom;
  if (frames === 0) return { sum, frames };
  const held = hist.frameRing.length;
  if (isSummed ? first === qs.sumFrom && end >= qs.sumTo - 1 : first > last - held) {
    if (!isSummed) sum.fill(0);
    for (let f = isSummed ? qs.sumTo : first; f <= end; f++) addFrame(sum, hist.frameRing[f % held], hist.hiBin);
    return { sum, frames };
  }
  sum.fill(0);
  const out = spec.fftOut;
  const scale = spec.powerScale;
  const frame = new Float64Array(n);
  const bins = Math.min(sum.length, hist.hiBin + 1);
  for (let f = first; f <= end; f++) {
    readRing(qs.ring, frameStartJ(qs, f), n, frame);
    realFftWindowed(spec.fft, out, frame, 0, spec.window);
    for (let k = 0; k < bins; k++) sum[k] += Math.fround((out[2 * k] * out[2 * k] + out[2 * k + 1] * out[2 * k + 1]) * scale);
  }
  return { sum, frames };
}

/**
 * The most prominent peak of the long-averaged (Welch: the analysis's Hann frames at its hop, 50 %
 * overlap) spectrum of a quiet stretch, away from steady lines; null when none stands out.
 */
function findResonance(ctx: ResonanceContext, stretch: StretchSpectrum): number | null {
  const spec = ctx.spec;
  if (stretch.frames < 8) return null;
  const acc = stretch.sum;
  const lo = Math.max(ctx.loBin + 1, Math.ceil(RESONANCE_EDGE_HZ / spec.binHz));
  const hi = Math.min(ctx.hiBin - 1, Math.floor((ctx.bandHighHz - RESONANCE_EDGE_HZ) / spec.binHz));
  // The search reads bins up to hi (peaks below hi, their right neighbour, the floor's prefix sums
  // up to hi).
  const used = Math.max(0, Math.min(spec.binCount, hi + 1));
  // The spectrum's own floor helper on a view of the summed spectrum (prominence is a ratio: the sum serves as the mean).
  const pre = new Float64Array(spec.binCount + 1);
  for (let k = 0; k < used; k++) pre[k + 1] = pre[k] + acc[k];
  const view = { ...spec, smooth: acc, prefix: pre } as SpectrumState;
  let bestK = -1;
  let bestProm = RESONANCE_MIN_DB;
  for (let k = lo; k < hi; k++) {
    if (!(acc[k] > acc[k - 1] && acc[k] >= acc[k + 1])) continue;
    const f = k * spec.binHz;
    if (ctx.steadyHz.some((g) => Math.abs(g - f) < 3 * spec.binHz)) continue;
    const floor = localFloorMean(view, k, 4, 24, lo, hi);
    if (!(floor > 0)) continue;
    const prom = 10 * Math.log10(acc[k] / floor);
    if (prom > bestProm) {
      bestProm = prom;
      bestK = k;
    }
  }
  return bestK < 0 ? null : bestK * spec.binHz;
}
