/**
 * Quiet stretches for noise-driven damping (docs/DESIGN.md "Quiet store", stage 7): while no tone
 * is active the conditioned samples are kept (up to QUIET_STORE_S); when a tone becomes active, or
 * at a gap or the end, the stretch is closed and the most prominent resonance of its averaged
 * spectrum is handed to dsp/damping.ts.
 */
import { estimateNoiseDrivenDamping } from './damping';
import { readRing, writeRing } from './history';
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
}

export function createQuietStore(analysisRateHz: number): QuietStore {
  return { ring: new Float32Array(Math.ceil(QUIET_STORE_S * analysisRateHz)), startJ: 0, isOpen: true, analysisRateHz, results: [] };
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
 */
export function closeQuietStretch(
  qs: QuietStore,
  jEnd: number,
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
  const x = readRing(qs.ring, j0, len);
  const centre = findResonance(ctx, x);
  if (centre === null) return;
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

/**
 * The most prominent peak of the long-averaged (Welch, Hann, the frames' hop: 50 % overlap) spectrum of a quiet
 * stretch, away from steady lines; null when none stands out.
 */
function findResonance(ctx: ResonanceContext, x: Float32Array): number | null {
  const spec = ctx.spec;
  const n = spec.frameSize;
  const hop = spec.hopSize;
  const lo = Math.max(ctx.loBin + 1, Math.ceil(RESONANCE_EDGE_HZ / spec.binHz));
  const hi = Math.min(ctx.hiBin - 1, Math.floor((ctx.bandHighHz - RESONANCE_EDGE_HZ) / spec.binHz));
  // The search reads bins up to hi (peaks below hi, their right neighbour, the floor's prefix sums
  // up to hi): the average is kept up to there only.
  const used = Math.max(0, Math.min(spec.binCount, hi + 1));
  const acc = new Float64Array(spec.binCount);
  let frames = 0;
  const out = spec.fftOut;
  const frame = new Float64Array(n);
  for (let s = 0; s + n <= x.length; s += hop) {
    frame.set(x.subarray(s, s + n));
    realFftWindowed(spec.fft, out, frame, 0, spec.window);
    for (let k = 0; k < used; k++) acc[k] += out[2 * k] * out[2 * k] + out[2 * k + 1] * out[2 * k + 1];
    frames++;
  }
  if (frames < 8) return null;
  // The spectrum's own floor helper on a view of the averaged spectrum.
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
