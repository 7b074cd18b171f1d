/**
 * Stage 3a, spectral peaks: local maxima of the averaged spectrum that stand out from the local
 * noise floor, sub-bin frequency by the exact Hann three-point interpolator, harmonic grouping so a
 * tone's fundamental is reported rather than 2f, and the narrow-band background around a tone.
 */
import { localFloorMean, type SpectrumState } from './spectrum';

/**
 * Sub-bin offset δ (bins, −0.5..0.5 for a true peak) of a tone from the magnitudes of the peak bin
 * and its neighbours under a periodic Hann window: δ = 2 (|X(k+1)| − |X(k−1)|) / (|X(k−1)| +
 * 2|X(k)| + |X(k+1)|). Exact for an isolated noise-free tone (only the negative-frequency image
 * errs). Three-point form of Grandke 1983, "Interpolation algorithms for discrete Fourier
 * transforms of weighted signals", IEEE Trans. Instrum. Meas. 32(2); REFERENCES.md §9.
 */
export function hannPeakOffset(magPrev: number, magPeak: number, magNext: number): number {
  const den = magPrev + 2 * magPeak + magNext;
  if (!(den > 0)) return 0;
  return (2 * (magNext - magPrev)) / den;
}

/**
 * Periodic-Hann amplitude response at δ bins from the centre, relative to the centre:
 * sinc(δ)/(1 − δ²) (Harris 1978). Divide a peak bin's magnitude by this to get the tone amplitude.
 */
export function hannAmplitudeResponse(offsetBins: number): number {
  const d = offsetBins;
  if (Math.abs(d) < 1e-9) return 1;
  if (Math.abs(Math.abs(d) - 1) < 1e-9) return 0.5;
  return Math.sin(Math.PI * d) / (Math.PI * d) / (1 - d * d);
}

/** Peaks found in one frame (fixed capacity, reused). */
export interface PeakList {
  count: number;
  capacity: number;
  freqHz: Float64Array;
  /** Peak bin in the averaged spectrum. */
  bin: Int32Array;
  /** Peak power over the local floor, dB. */
  prominenceDb: Float64Array;
  /** Interpolated peak power (amplitude² of the tone). */
  power: Float64Array;
  /** Order of the harmonic if this peak belongs to a lower peak (0 = a fundamental). */
  harmonicOf: Int32Array;
}

/** Allocates a peak list holding up to `capacity` peaks. */
export function createPeakList(capacity: number): PeakList {
  return {
    count: 0,
    capacity,
    freqHz: new Float64Array(capacity),
    bin: new Int32Array(capacity),
    prominenceDb: new Float64Array(capacity),
    power: new Float64Array(capacity),
    harmonicOf: new Int32Array(capacity),
  };
}

/** Prominence a peak needs before a weaker peak at its half or third is taken as its fundamental, dB. */
const SUBHARMONIC_SOURCE_MIN_DB = 15;

/** Floor of the prominence test: bins inner..outer away on both sides. */
export const FLOOR_INNER_BINS = 4;
export const FLOOR_OUTER_BINS = 16;

/** Prominence (dB) of bin k of the averaged spectrum over its local floor. */
export function prominenceDb(st: SpectrumState, k: number, loBin: number, hiBin: number): number {
  const floor = localFloorMean(st, k, FLOOR_INNER_BINS, FLOOR_OUTER_BINS, loBin, hiBin);
  if (!(floor > 0)) return 0;
  return 10 * Math.log10(st.smooth[k] / floor);
}

/** Interpolated frequency (Hz) of the peak at bin k, from the latest frame when it peaks there, else the average. */
export function peakFrequencyHz(st: SpectrumState, k: number): number {
  const p = st.power;
  const useFrame = p[k] >= p[k - 1] && p[k] >= p[k + 1];
  const src = useFrame ? p : st.smooth;
  const d = hannPeakOffset(Math.sqrt(src[k - 1]), Math.sqrt(src[k]), Math.sqrt(src[k + 1]));
  return (k + d) * st.binHz;
}

/**
 * First bin of from .. to − 1 whose averaged power is not clearly below its local floor (the
 * power ratio clearlyBelow), or `to`: the floor is localFloorMean's on both sides, compared as sums
 * over the span bins without the divisions. For bins at least FLOOR_OUTER_BINS inside the band.
 */
function firstNotClearlyBelow(sm: Float64Array, pre: Float64Array, from: number, to: number, clearlyBelow: number): number {
  const span = FLOOR_OUTER_BINS - FLOOR_INNER_BINS + 1;
  for (let k = from; k < to; k++) {
    const sum = Math.min(pre[k - FLOOR_INNER_BINS + 1] - pre[k - FLOOR_OUTER_BINS], pre[k + FLOOR_OUTER_BINS + 1] - pre[k + FLOOR_INNER_BINS]);
    if (!(sum > 0 && sum < Infinity && sm[k] * span < clearlyBelow * sum)) return k;
  }
  return to;
}

/** Adds bin k to the peak list when it is a local maximum of prominence ≥ minProminenceDb (the strongest out.capacity kept). */
function keepPeak(st: SpectrumState, k: number, lo: number, hi: number, minProminenceDb: number, out: PeakList): void {
  const sm = st.smooth;
  if (!(sm[k] > sm[k - 1] && sm[k] >= sm[k + 1])) return;
  const prom = prominenceDb(st, k, lo, hi);
  if (prom < minProminenceDb) return;
  let slot = out.count;
  if (slot >= out.capacity) {
    // Replace the weakest kept peak when this one is stronger.
    let weakest = 0;
    for (let j = 1; j < out.count; j++) if (out.prominenceDb[j] < out.prominenceDb[weakest]) weakest = j;
    if (out.prominenceDb[weakest] >= prom) return;
    slot = weakest;
  } else out.count++;
  const f = peakFrequencyHz(st, k);
  const response = hannAmplitudeResponse(f / st.binHz - k);
  out.freqHz[slot] = f;
  out.bin[slot] = k;
  out.prominenceDb[slot] = prom;
  out.power[slot] = sm[k] / (response * response);
  out.harmonicOf[slot] = 0;
}

/**
 * Finds local maxima of the averaged spectrum between loBin and hiBin (exclusive) whose prominence
 * is at least minProminenceDb; keeps the strongest out.capacity by prominence. Allocates nothing.
 */
export function findPeaks(st: SpectrumState, loBin: number, hiBin: number, minProminenceDb: number, out: PeakList): void {
  const lo = Math.max(1, loBin);
  const hi = Math.min(st.binCount - 1, hiBin);
  out.count = 0;
  // Power ratio a little under the threshold: maxima clearly below it skip the logarithm (most of
  // a noisy spectrum's maxima); the rest are decided on the exact value in dB.
  const clearlyBelow = 10 ** (minProminenceDb / 10) * (1 - 1e-9);
  // The floor test comes first: it rejects almost every bin of a noisy spectrum, and so is
  // predicted well, where the test for a local maximum fails at random. Away from the band edges
  // it runs as a scan of its own over the prefix sums.
  const kInner0 = lo + FLOOR_OUTER_BINS;
  const kInner1 = hi - FLOOR_OUTER_BINS - 1;
  let k = lo;
  while (k < hi) {
    if (k >= kInner0 && k <= kInner1) {
      k = firstNotClearlyBelow(st.smooth, st.prefix, k, kInner1 + 1, clearlyBelow);
      if (k > kInner1) continue;
    } else {
      const floor = localFloorMean(st, k, FLOOR_INNER_BINS, FLOOR_OUTER_BINS, lo, hi);
      if (floor > 0 && st.smooth[k] < clearlyBelow * floor) {
        k++;
        continue;
      }
    }
    keepPeak(st, k, lo, hi, minProminenceDb, out);
    k++;
  }
}

/**
 * Power leaked by a periodic-Hann windowed tone into a bin d bins away, relative to its peak:
 * |sinc(d)/(1 − d²)|² bounded by its envelope 1/(π d (d² − 1))² (Harris 1978). Used to tell a
 * strong tone's sidelobes from a second tone.
 */
export function hannLeakagePower(offsetBins: number): number {
  const d = Math.abs(offsetBins);
  if (d < 2) return 1;
  const a = 1 / (Math.PI * d * (d * d - 1));
  return a * a;
}

/** A peak must stand this far (dB) over a stronger peak's sidelobe envelope to count as a tone. */
const LEAKAGE_MARGIN_DB = 10;

/**
 * Marks peaks that are sidelobes of a stronger peak (harmonicOf = 1): their power is within
 * LEAKAGE_MARGIN_DB of the stronger peak's Hann leakage at that distance. Allocates nothing.
 */
export function suppressLeakage(st: SpectrumState, peaks: PeakList): void {
  const margin = 10 ** (LEAKAGE_MARGIN_DB / 10);
  for (let j = 0; j < peaks.count; j++) {
    for (let i = 0; i < peaks.count; i++) {
      if (i === j || peaks.power[i] <= peaks.power[j]) continue;
      const d = (peaks.freqHz[j] - peaks.freqHz[i]) / st.binHz;
      if (peaks.power[j] < margin * peaks.power[i] * hannLeakagePower(d)) {
        peaks.harmonicOf[j] = 1;
        break;
      }
    }
  }
}

/**
 * Harmonic grouping: a peak lying at n × the frequency of a lower peak (n = 2..8, within
 * tolerance) is marked as that peak's n-th harmonic; a strong peak whose half or third shows a
 * weaker local maximum (prominence ≥ subMinProminenceDb) is moved down to that fundamental.
 * Afterwards only peaks with harmonicOf = 0 are fundamentals. Run suppressLeakage first (its marks
 * are kept). Allocates nothing.
 */
export function groupHarmonics(st: SpectrumState, peaks: PeakList, loBin: number, hiBin: number, subMinProminenceDb: number): void {
  const binHz = st.binHz;
  // 1. Move strong peaks down to a weaker fundamental at f/2 or f/3 (repeat for f/4 = (f/2)/2).
  // Only clear tones are moved: a noise peak's "subharmonic" would be another noise peak.
  for (let i = 0; i < peaks.count; i++) {
    if (peaks.prominenceDb[i] < SUBHARMONIC_SOURCE_MIN_DB || peaks.harmonicOf[i] !== 0) continue;
    for (let iter = 0; iter < 3; iter++) {
      let moved = false;
      for (let n = 2; n <= 3 && !moved; n++) {
        const target = peaks.freqHz[i] / n / binHz;
        const k0 = Math.round(target);
        for (let k = k0 - 1; k <= k0 + 1; k++) {
          if (k <= Math.max(1, loBin) || k >= hiBin - 1) continue;
          const sm = st.smooth;
          if (!(sm[k] > sm[k - 1] && sm[k] >= sm[k + 1])) continue;
          if (prominenceDb(st, k, loBin, hiBin) < subMinProminenceDb) continue;
          const f = peakFrequencyHz(st, k);
          if (Math.abs(f * n - peaks.freqHz[i]) > 0.3 * binHz + 0.002 * peaks.freqHz[i]) continue;
          // The fundamental carries its own (weaker) prominence.
          const subProm = prominenceDb(st, k, loBin, hiBin);
          peaks.freqHz[i] = f;
          peaks.bin[i] = k;
          peaks.prominenceDb[i] = subProm;
          moved = true;
          break;
        }
      }
      if (!moved) break;
    }
  }
  // 2. Mark harmonics of lower peaks and duplicates.
  for (let i = 0; i < peaks.count; i++) {
    const fi = peaks.freqHz[i];
    for (let j = 0; j < peaks.count; j++) {
      if (j === i || peaks.harmonicOf[j] !== 0) continue;
      const fj = peaks.freqHz[j];
      if (fj > fi * 1.001) continue;
      const n = Math.round(fi / fj);
      if (n < 1 || n > 8) continue;
      if (Math.abs(fi - n * fj) > 0.6 * binHz + 0.004 * fi) continue;
      if (n === 1) {
        // Two entries for one fundamental: keep the more prominent.
        if (peaks.prominenceDb[j] > peaks.prominenceDb[i] || (peaks.prominenceDb[j] === peaks.prominenceDb[i] && j < i)) {
          peaks.harmonicOf[i] = 1;
          break;
        }
        continue;
      }
      peaks.harmonicOf[i] = n;
      break;
    }
  }
}

/**
 * Mean noise power per bin near a tone at bin k of `power` (one frame, unsmoothed): the median of
 * the bins inner..outer away on both sides divided by ln 2 (the median of an exponentially
 * distributed noise bin is ln 2 × its mean), robust to other tones and leakage among them.
 * scratch must hold 2 × (outer − inner + 1) values.
 */
export function neighbourNoisePower(
  power: Float64Array,
  k: number,
  inner: number,
  outer: number,
  loBin: number,
  hiBin: number,
  scratch: Float64Array,
): number {
  let m = 0;
  for (let d = inner; d <= outer; d++) {
    const a = k - d;
    const b = k + d;
    if (a >= loBin && a >= 1) scratch[m++] = power[a];
    if (b < hiBin) scratch[m++] = power[b];
  }
  if (m === 0) return 0;
  // Insertion sort of a few dozen values.
  for (let i = 1; i < m; i++) {
    const v = scratch[i];
    let j = i - 1;
    while (j >= 0 && scratch[j] > v) {
      scratch[j + 1] = scratch[j];
      j--;
    }
    scratch[j + 1] = v;
  }
  const med = m % 2 === 1 ? scratch[(m - 1) / 2] : 0.5 * (scratch[m / 2 - 1] + scratch[m / 2]);
  return med / Math.LN2;
}
