/**
 * Recent history of the analysis (docs/DESIGN.md "History"): the conditioned samples of the last
 * HISTORY_S (a tone confirmed late has its envelope rebuilt from them), the broadband mean square
 * and clipping per envelope-clock sample, and the power spectra of the frames of the same span
 * (the band background of a late tone). Written sample by sample; nothing is allocated per frame.
 */
import { bandPowerFromBinPower } from './envelope';
import { neighbourNoisePower } from './peak';
import type { SpectrumState } from './spectrum';

/** History kept for tones detected late (their envelope is rebuilt from here), s. */
export const HISTORY_S = 10;
/** Background bins beside a tone: inner..outer bins away (clear of the Hann main lobe and of a drifting tone). */
const BG_INNER_BINS = 6;
const BG_OUTER_BINS = 30;

export interface History {
  /** Ring of conditioned samples and the oldest valid global analysis index. */
  ring: Float32Array;
  ringStartJ: number;
  /** Per envelope-clock sample: broadband mean square and clipping (ring). */
  envMs: Float64Array;
  envClip: Uint8Array;
  accMs: number;
  accClip: number;
  /** Latest analysis index whose input held clipping. */
  lastClipJ: number;
  /** Frame ring: power spectra and centre times. */
  frameRing: Float32Array[];
  frameTimeS: Float64Array;
  /** Global index of the first frame after the latest gap (older frames do not apply). */
  frameFloor: number;
  /** Analysed band in bins, the envelope's narrow noise bandwidth (Hz) and scratch for the background. */
  loBin: number;
  hiBin: number;
  envBandwidthHz: number;
  bgScratch: Float64Array;
}

export function createHistory(p: { analysisRateHz: number; spec: SpectrumState; envRateHz: number; envBandwidthHz: number; loBin: number; hiBin: number }): History {
  const historyFrames = Math.ceil((HISTORY_S * p.analysisRateHz) / p.spec.hopSize) + 4;
  const frameRing: Float32Array[] = [];
  for (let i = 0; i < historyFrames; i++) frameRing.push(new Float32Array(p.spec.binCount));
  const envHistory = Math.ceil((HISTORY_S + 2) * p.envRateHz);
  return {
    ring: new Float32Array(Math.ceil(HISTORY_S * p.analysisRateHz)),
    ringStartJ: 0,
    envMs: new Float64Array(envHistory),
    envClip: new Uint8Array(envHistory),
    accMs: 0,
    accClip: 0,
    lastClipJ: -Infinity,
    frameRing,
    frameTimeS: new Float64Array(historyFrames),
    frameFloor: 0,
    loBin: p.loBin,
    hiBin: p.hiBin,
    envBandwidthHz: p.envBandwidthHz,
    bgScratch: new Float64Array(2 * (BG_OUTER_BINS - BG_INNER_BINS + 1)),
  };
}

/**
 * Writes conditioned samples x[from, to) (clipping flags in clip) starting at global analysis
 * index j0, with envelope clock m; returns the index after the last.
 */
export function stepHistory(h: History, x: Float32Array, clip: Uint8Array, from: number, to: number, j0: number, m: number): number {
  const ringCap = h.ring.length;
  const envLen = h.envMs.length;
  writeRing(h.ring, x, from, to, j0);
  let ph = j0 % m;
  let accMs = h.accMs;
  let accClip = h.accClip;
  let sawClip = 0;
  // Envelope-clock sample by sample: the inner loop runs to the end of the sample or of the input.
  let q = from;
  while (q < to) {
    const stop = Math.min(to, q + (m - ph));
    ph += stop - q;
    for (; q < stop; q++) {
      const v = x[q];
      accMs += v * v;
      accClip |= clip[q];
    }
    if (ph < m) break;
    ph = 0;
    const g = (j0 + (q - from)) / m - 1;
    h.envMs[g % envLen] = accMs / m;
    h.envClip[g % envLen] = accClip;
    sawClip |= accClip;
    accMs = 0;
    accClip = 0;
  }
  // The latest clipped sample, looked for only when the input clipped.
  if (sawClip | accClip) {
    for (let k = to - 1; k >= from; k--) {
      if (clip[k]) {
        h.lastClipJ = j0 + (k - from);
        break;
      }
    }
  }
  const j = j0 + (to - from);
  h.accMs = accMs;
  h.accClip = accClip;
  if (h.ringStartJ < j - ringCap) h.ringStartJ = j - ringCap;
  return j;
}

/**
 * Writes x[from, to) into a ring of samples indexed by global analysis index (index j at j mod
 * length), the first at j0: at most two block copies (only the newest ring.length samples stay).
 */
export function writeRing(ring: Float32Array, x: Float32Array, from: number, to: number, j0: number): void {
  const cap = ring.length;
  if (to - from > cap) {
    j0 += to - from - cap;
    from = to - cap;
  }
  const p = j0 % cap;
  const first = Math.min(to - from, cap - p);
  ring.set(x.subarray(from, from + first), p);
  if (from + first < to) ring.set(x.subarray(from + first, to), 0);
}

/**
 * The samples of global analysis indices j0 .. j0 + len − 1 (len ≤ ring.length) from a ring
 * written by writeRing, as a new array (or into `out`, from its start).
 */
export function readRing<T extends Float32Array | Float64Array = Float32Array>(ring: Float32Array, j0: number, len: number, out?: T): T {
  const cap = ring.length;
  const p = j0 % cap;
  const first = Math.min(len, cap - p);
  const x = out ?? (new Float32Array(len) as T);
  x.set(ring.subarray(p, p + first));
  if (first < len) x.set(ring.subarray(0, len - first), first);
  return x;
}

/** Keeps frame `frameIdx`'s power spectrum and centre time. */
export function storeFrame(h: History, frameIdx: number, power: Float32Array | Float64Array, timeS: number): void {
  const fr = h.frameTimeS.length;
  h.frameTimeS[frameIdx % fr] = timeS;
  const slot = h.frameRing[frameIdx % fr];
  slot.set(power.length === slot.length ? power : power.subarray(0, slot.length));
}

/** Forgets samples and frames before a gap that starts the new time base at analysis index jNext. */
export function breakHistory(h: History, jNext: number, frameCount: number): void {
  h.accMs = 0;
  h.accClip = 0;
  h.ringStartJ = jNext;
  h.frameFloor = frameCount;
}

/** Band background (envelope power units) at freqHz from one frame's power spectrum. */
export function bandBackground(h: History, spec: SpectrumState, power: Float32Array | Float64Array, freqHz: number): number {
  const k = Math.min(h.hiBin - 1, Math.max(h.loBin + 1, Math.round(freqHz / spec.binHz)));
  const perBin = neighbourNoisePower(power as Float64Array, k, BG_INNER_BINS, BG_OUTER_BINS, h.loBin, h.hiBin, h.bgScratch);
  return bandPowerFromBinPower(perBin, h.envBandwidthHz, spec.binHz);
}
