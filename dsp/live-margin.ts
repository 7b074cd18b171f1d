/**
 * The margin to humming while listening: the linear growth rate ν from the noise
 * (dsp/mode-statistics.ts) over the latest stretch of steady operation, re-estimated every few
 * seconds (LIVE_MARGIN_EVERY_S, or once a sixth of the stretch is new) so its interval narrows as
 * data comes in. The input is kept in a ring after a boxcar
 * decimation to about 8 kHz (a mode above 4 kHz is outside the default band; the boxcar's nulls
 * sit on the frequencies that would fold onto the band's low end, and the broadband noise it lets
 * fold is a floor the estimator removes). The ring holds each sample twice, at i and i + its
 * capacity, so the window is always one contiguous view of it, never copied. pushLiveMargin
 * allocates nothing; estimateLiveMargin allocates. The bands around the mode are kept mixed down
 * as audio arrives (baseband-stream.ts): an estimate mixes only the audio that came in since the
 * last one.
 */
import { basebandOfWindow, createBasebandStream, type BasebandStream } from './baseband-stream';
import { earlyWarningIndicators } from './early-warning';
import { MODE_BAND_MIN_HALF_WIDTH_HZ, MODE_ENVELOPE_RATE_MULTIPLE, modeBandHalfWidth, modeStatisticsOfBaseband } from './mode-statistics';
import { kthSmallest } from './stats';
import { isMainsMultiple, MAINS_HZ } from './track';
import { createWelchStream, welchOfWindow, type WelchStream } from './welch-stream';
import type { Interval, NoiseRegime } from './types';

/** Ring rate target, Hz; window, cadence and least data before a first estimate, s. */
const TARGET_RATE_HZ = 8000;
export const LIVE_MARGIN_WINDOW_S = 60;
export const LIVE_MARGIN_EVERY_S = 2;
export const LIVE_MARGIN_MIN_S = 10;
/**
 * An estimate is also due only once this share of the samples it reads is new. The estimate
 * averages over its stretch (up to the window), so it answers a change of operation no faster
 * than about that stretch: refreshing after a sixth of it is new adds at most a sixth to that lag,
 * and keeps the cost per second of audio bounded (an estimate's cost grows with its stretch:
 * every 2 s on a full 60 s window it cost about as much as the whole analysis of the audio).
 */
export const LIVE_MARGIN_NEW_SHARE = 1 / 6;
/** Welch frame for the resonance search (~1 Hz bins at 8 kHz) and the least prominence over the local median, dB. */
const SEARCH_FRAME = 8192;
const RESONANCE_MIN_DB = 6;
/** Margin below the best prominence so far within which a peak's median is still taken, dB (far above the rounding of the bound, far below any difference that matters). */
const PROMINENCE_TIE_DB = 1e-9;
/** Lowest mode searched, Hz (the estimator's band is capped at f/7; below this it is too narrow to hold a mode). */
const SEARCH_LOW_HZ = 30;

export interface LiveMarginState {
  inputRateHz: number;
  factor: number;
  rateHz: number;
  /** Samples the window holds at most. */
  capacity: number;
  /** The ring, twice the capacity long: sample i of the ring sits at i and at i + capacity. */
  ring: Float32Array;
  /** Where the next ring sample goes (count modulo the capacity). */
  writeAt: number;
  /** Samples written since the last restart (may exceed the capacity), and the boxcar accumulator. */
  count: number;
  acc: number;
  accN: number;
  /** Input time of the stretch start, s, and of the latest sample. */
  startS: number;
  inputSamples: number;
  lastEstimateCount: number;
  /** The mode's band and the early-warning band, mixed down since the stretch began (null until an estimate needs them). */
  modeBand: BasebandStream | null;
  warningBand: BasebandStream | null;
  /** The resonance search's Welch spectrum since the stretch began (null until a search needs it). */
  welch: WelchStream | null;
}

export interface LiveMargin {
  frequencyHz: number;
  growthRatePerS: number;
  growthRateCi95PerS: Interval;
  regime: NoiseRegime;
  method: string;
  startS: number;
  endS: number;
  /** Kendall's τ of the envelope's variance and lag autocorrelation over 5 s windows (dsp/early-warning.ts): near +1 while the damping falls; NaN with too few windows. */
  varianceTrend: number;
  autocorrelationTrend: number;
}

/** Half-width of the band whose envelope feeds the early-warning indicators, Hz (the estimator's default band, REFERENCES.md §41). */
const WARNING_HALF_WIDTH_HZ = 25;
/** Envelope rate of the early-warning band in multiples of its half-width (dsp/baseband.ts mixDownDecimate's default design). */
const WARNING_RATE_MULTIPLE = 8;

export function createLiveMargin(cfg: { sampleRateHz: number; windowS?: number }): LiveMarginState {
  const fs = cfg.sampleRateHz;
  if (!(fs >= 500 && fs <= 384000)) throw new RangeError(`sampleRateHz must lie in 500–384000 Hz, got ${fs}`);
  const windowS = cfg.windowS ?? LIVE_MARGIN_WINDOW_S;
  if (!(windowS >= LIVE_MARGIN_MIN_S && windowS <= 600)) throw new RangeError(`windowS must lie in ${LIVE_MARGIN_MIN_S}–600 s, got ${windowS}`);
  const factor = Math.max(1, Math.floor(fs / TARGET_RATE_HZ));
  const rateHz = fs / factor;
  const cap = Math.ceil(windowS * rateHz);
  return { inputRateHz: fs, factor, rateHz, capacity: cap, ring: new Float32Array(2 * cap), writeAt: 0, count: 0, acc: 0, accN: 0, startS: 0, inputSamples: 0, lastEstimateCount: 0, modeBand: null, warningBand: null, welch: null };
}

/** Feeds input samples (never throws, allocates nothing). */
export function pushLiveMargin(st: LiveMarginState, block: Float32Array): void {
  const cap = st.capacity;
  const ring = st.ring;
  const factor = st.factor;
  let acc = st.acc;
  let accN = st.accN;
  let at = st.writeAt;
  let count = st.count;
  for (let i = 0; i < block.length; i++) {
    acc += block[i];
    if (++accN === factor) {
      const v = acc / factor;
      ring[at] = v;
      ring[at + cap] = v;
      at = at + 1 === cap ? 0 : at + 1;
      count++;
      acc = 0;
      accN = 0;
    }
  }
  st.acc = acc;
  st.accN = accN;
  st.writeAt = at;
  st.count = count;
  st.inputSamples += block.length;
}

/** Starts a new stretch (a tone started or stopped, a gap): the window restarts empty. */
export function restartLiveMargin(st: LiveMarginState, missingSamples = 0): void {
  st.inputSamples += missingSamples;
  st.count = 0;
  st.writeAt = 0;
  st.acc = 0;
  st.accN = 0;
  st.lastEstimateCount = 0;
  st.modeBand = null;
  st.warningBand = null;
  st.welch = null;
  st.startS = st.inputSamples / st.inputRateHz;
}

/** True when enough new data has come in for a fresh estimate. */
export function isLiveMarginDue(st: LiveMarginState): boolean {
  const held = Math.min(st.count, st.capacity);
  return st.count >= LIVE_MARGIN_MIN_S * st.rateHz && st.count - st.lastEstimateCount >= Math.max(LIVE_MARGIN_EVERY_S * st.rateHz, LIVE_MARGIN_NEW_SHARE * held);
}

/**
 * The most prominent peak of the window's Welch spectrum (Hann, 50 % overlap, kept up to date as
 * audio arrives: welch-stream.ts) away from mains lines; NaN when none stands out.
 */
function findResonanceHz(st: LiveMarginState, x: Float32Array, x0: number, bandHighHz: number): number {
  const n = Math.min(SEARCH_FRAME, 1 << Math.floor(Math.log2(Math.max(4, x.length / 4))));
  if (st.welch === null || st.welch.n !== n) st.welch = createWelchStream(n, st.capacity);
  const { sum: acc, frames } = welchOfWindow(st.welch, x, x0);
  if (frames === 0) return Number.NaN;
  const rateHz = st.rateHz;
  const binHz = rateHz / n;
  const half = Math.max(4, Math.round(20 / binHz));
  const lo = Math.max(half + 1, Math.ceil(SEARCH_LOW_HZ / binHz));
  const hi = Math.min(n / 2 - half - 1, Math.floor(Math.min(bandHighHz, rateHz / 2 - 50) / binHz));
  let best = Number.NaN;
  let bestProm = RESONANCE_MIN_DB;
  const around = new Float64Array(2 * half);
  for (let k = lo; k < hi; k++) {
    if (!(acc[k] > acc[k - 1] && acc[k] >= acc[k + 1])) continue;
    const f = k * binHz;
    if (MAINS_HZ.some((m) => isMainsMultiple(f, m))) continue;
    // Local median of ±20 Hz, the peak's own ±2 bins left out (sorting only when a value does not compare).
    let m = 0;
    let isComparable = true;
    let lowest = Infinity;
    for (let j = k - half; j <= k + half; j++) {
      if (Math.abs(j - k) <= 2) continue;
      around[m++] = acc[j];
      if (Number.isNaN(acc[j])) isComparable = false;
      if (acc[j] < lowest) lowest = acc[j];
    }
    // The median is no lower than the lowest: a peak that stands over even that by less than the best so far cannot win (most bins of a noise spectrum), so its median is not taken.
    if (isComparable && 10 * Math.log10(acc[k] / lowest) < bestProm - PROMINENCE_TIE_DB) continue;
    const med = isComparable ? kthSmallest(around, m, m >> 1) : around.subarray(0, m).sort()[m >> 1];
    const prom = 10 * Math.log10(acc[k] / med);
    if (prom > bestProm) {
      bestProm = prom;
      best = f;
    }
  }
  return best;
}

/**
 * A mode band drawn again when the centre moves by more than this share of its half-width (a tone
 * that drifts as the gas warms, a searched resonance that moves): the mode's offset within the band
 * is measured by the estimator (its mean phase rate), and a tenth of the half-width keeps the mode
 * and its Lorentzian shoulders well inside the flat band (common practice).
 */
const RECENTRE_SHARE = 0.1;

/**
 * The streams of the mode's band and of the early-warning band around `centreHz`, kept while the
 * centre holds (RECENTRE_SHARE); null when the band is too narrow for the estimator (the mode
 * lies too close to 0 Hz or to half the ring's rate).
 */
function bandsAround(st: LiveMarginState, centreHz: number, maxWindow: number): { mode: BasebandStream; warning: BasebandStream } | null {
  const half = modeBandHalfWidth(st.rateHz, centreHz);
  if (!(half >= MODE_BAND_MIN_HALF_WIDTH_HZ)) return null;
  const mode = st.modeBand;
  const warning = st.warningBand;
  if (mode !== null && warning !== null && Math.abs(centreHz - mode.centreHz) <= RECENTRE_SHARE * mode.halfWidthHz) return { mode, warning };
  const fresh = createBasebandStream(st.rateHz, centreHz, half, MODE_ENVELOPE_RATE_MULTIPLE, maxWindow);
  const warningHalf = Math.min(WARNING_HALF_WIDTH_HZ, centreHz / 7);
  // Below about 175 Hz both bands are f/7 wide: one stream serves both.
  const freshWarning = Math.abs(warningHalf - half) <= 1e-9 * half ? fresh : createBasebandStream(st.rateHz, centreHz, warningHalf, WARNING_RATE_MULTIPLE, maxWindow);
  st.modeBand = fresh;
  st.warningBand = freshWarning;
  return { mode: fresh, warning: freshWarning };
}

/**
 * The samples an estimate reads: the latest min(count, capacity) of the ring in time order, one
 * view of the doubled ring (never copied), and the count of the first of them since the restart.
 */
export function liveMarginWindow(st: LiveMarginState): { x: Float32Array; x0: number } {
  const len = Math.min(st.count, st.capacity);
  const x0 = st.count - len;
  const first = x0 % st.capacity;
  return { x: st.ring.subarray(first, first + len), x0 };
}

/**
 * ν with its 95 % interval over the current stretch (at most the window), at the tone's frequency
 * `centreHz` when one is tracked, else at the most prominent resonance; null when there is none
 * or no route gave an estimate.
 */
export function estimateLiveMargin(st: LiveMarginState, centreHz: number, bandHighHz = 4000): LiveMargin | null {
  st.lastEstimateCount = st.count;
  const cap = st.capacity;
  const len = Math.min(st.count, cap);
  if (len < LIVE_MARGIN_MIN_S * st.rateHz) return null;
  const { x, x0 } = liveMarginWindow(st);
  const f = Number.isFinite(centreHz) && centreHz > 0 ? centreHz : findResonanceHz(st, x, x0, bandHighHz);
  if (!Number.isFinite(f)) return null;
  const bands = bandsAround(st, f, cap);
  if (bands === null) return null;
  const mode = basebandOfWindow(bands.mode, x, x0);
  const r = modeStatisticsOfBaseband(mode, st.rateHz, len / st.rateHz, { centreHz: bands.mode.centreHz, halfWidthHz: bands.mode.halfWidthHz });
  if (!r.isValid) return null;
  const endS = st.startS + (st.count * st.factor) / st.inputRateHz;
  // Early-warning trends on the envelope amplitude of the same band (REFERENCES.md §43).
  const z = bands.warning === bands.mode ? mode : basebandOfWindow(bands.warning, x, x0);
  const amp = new Float64Array(z.re.length);
  for (let i = 0; i < amp.length; i++) amp[i] = Math.hypot(z.re[i], z.im[i]);
  const ew = earlyWarningIndicators(amp, z.rateHz);
  return {
    frequencyHz: r.frequencyHz,
    growthRatePerS: r.growthRatePerS,
    growthRateCi95PerS: [r.ci95PerS[0], r.ci95PerS[1]],
    regime: r.regime,
    method: 'linear growth rate from the noise (envelope statistics)',
    startS: endS - len / st.rateHz,
    endS,
    varianceTrend: ew.varianceTrend,
    autocorrelationTrend: ew.autocorrelationTrend,
  };
}

/**
 * Feeds one analysed block: a tone that starts, grows or decays (an onset, or a growth or decay
 * segment closing in `update`) ends the stretch of steady operation, so the window restarts.
 */
export function feedLiveMargin(st: LiveMarginState, block: Float32Array, update: { onsets: readonly unknown[]; segments: readonly { kind: string }[] }): void {
  if (update.onsets.length > 0 || update.segments.some((s) => s.kind === 'growth' || s.kind === 'decay')) restartLiveMargin(st);
  pushLiveMargin(st, block);
}
