/**
 * Live onset detector (docs/REFERENCES.md §30): a second, short-frame sequential test that
 * announces a hum while it grows, without waiting for the long analysis frame to confirm a tone.
 *
 * Every hop of a short Hann frame gives the log-power y of each bin of the band. Each bin keeps a
 * running background (mean and variance of y while the bin is in control); the deviation
 * d = y − mean, less the median deviation over the band (a broadband loudness step moves every bin
 * alike and so cancels), is standardised and fed to Page's one-sided CUSUM
 * S = max(0, S + d/σ − k) (Page 1954). Its threshold h comes from the background statistics: the
 * average run length to a false alarm (Siegmund's approximation) is set so that all bins together
 * give one false alarm in FALSE_ALARM_HOURS of toneless noise.
 *
 * A CUSUM alarm is an onset only when the rise goes on for longer than the short kernel: over the
 * run since S last left zero (at least one frame length), the later half stands clearly above the
 * earlier half. A step (a line or mains switched on, a loudness change) rises within one kernel
 * and then holds; a knock rises within one kernel and then decays: neither passes, and the bin
 * takes the new level as its background. A growth rises steadily and passes.
 *
 * State is allocated once by createLiveOnsetState; stepLiveOnset allocates nothing.
 */
import { computeSpectrumFrame, createSpectrumState, feedSpectrum, resetSpectrumFraming, type SpectrumState } from './spectrum';

/** Short frame, s (rounded to a power of two of samples): 16 ms, under one e-folding time of a 50 1/s growth. */
const FRAME_S = 0.016;
/** Hops per frame (the kernel spans this many hops). */
const HOPS_PER_FRAME = 4;
/** Background time constant, s: long against a growth's rise, short against a session. */
const BACKGROUND_S = 3;
/** Warm-up before any alarm, s: the background mean and variance need a few hundred frames. */
const WARM_UP_S = 2;
/** CUSUM reference value k, in background sd: half the shift it is tuned to (Page 1954), 2 sd (about 11 dB of log-power): a growing tone soon stands several sd up. */
const CUSUM_K = 1;
/** All bins together give one false CUSUM alarm in this many hours of toneless noise. */
const FALSE_ALARM_HOURS = 1;
/**
 * Least background sd of log-power, Np: a strong steady line barely fluctuates, and level drifts
 * under about 1 dB (0.23 Np) must not count as shifts of many sd.
 */
const SIGMA_MIN_NP = 0.25;
/** Least rise between two consecutive windows of a run for an onset, Np (about 1 dB of power). */
const RISE_MIN_NP = 0.25;
/** The rise must also exceed this many sd of the difference of the window means. */
const RISE_Z = 3;
/** The rises of two consecutive windows agree within this factor (a steady exponential rise). */
const RISE_RATIO = 2;
/** An onset bin is the largest within this many bins (a louder tone's skirt rises with it but is no peak). */
const PEAK_BINS = 2;
/** Longest run examined, s: a rise that has not shown itself as a growth by then is a new level. */
const RUN_MAX_S = 1.2;
/** After an onset, bins within this many bins of it (and of its harmonics) stay silent this long, s. */
const HOLD_BINS = 3;
const HOLD_S = 3;
const MAX_HARMONIC = 10;
/** Most onsets announced by one step, and most announcements remembered for de-duplication. */
const MAX_ONSETS_PER_STEP = 8;
const RECENT_CAPACITY = 16;
/** Deviations the median's bracket aims to hold (a handful: selecting among them is cheap). */
const MEDIAN_BRACKET_COUNT = 8;

export interface LiveOnsetConfig {
  /** Rate of the conditioned samples, Hz. */
  sampleRateHz: number;
  bandLowHz: number;
  bandHighHz: number;
}

export interface LiveOnsetState {
  readonly spec: SpectrumState;
  readonly loBin: number;
  readonly hiBin: number;
  readonly hopS: number;
  /** CUSUM threshold h, in background sd (from the false-alarm rate). */
  readonly threshold: number;
  readonly alpha: number;
  readonly warmFrames: number;
  readonly runMax: number;
  mean: Float64Array;
  variance: Float64Array;
  cusum: Float64Array;
  /** Frame at which each bin's CUSUM last left zero. */
  runStart: Float64Array;
  /** Frame until which each bin stays silent after an onset near it. */
  holdUntil: Float64Array;
  /** Background sd of each bin, Np: max(SIGMA_MIN_NP, √variance), kept with the variance. */
  sd: Float64Array;
  /** Deviation history (ring of runMax frames, frame-major: one row of bins per frame). */
  devRing: Float64Array;
  /** Log-power of the latest frame per bin, Np, and a work copy of the deviations for the median. */
  logPower: Float64Array;
  scratch: Float64Array;
  /** The median's bracket: last median, half-width, Np, and the values it caught. */
  medianGuess: number;
  medianHalfWidth: number;
  bracket: Float64Array;
  winMean: Float64Array;
  winVar: Float64Array;
  frame: number;
  /** Analysis index of the next sample. */
  j: number;
  /** Onsets of the latest step: analysis sample index where the rise began, and frequency, Hz. */
  onsetJ: Float64Array;
  onsetFreqHz: Float64Array;
  onsetCount: number;
  /** Announcements of any source in the last HOLD_S (ring): time, s, and frequency, Hz. */
  recentTimeS: Float64Array;
  recentFreqHz: Float64Array;
  recentPos: number;
}

/**
 * Threshold h of a one-sided CUSUM with reference k for a given in-control average run length
 * (steps), by Siegmund's approximation ARL0 ≈ (e^{2k b} − 2k b − 1)/(2k²), b = h + 1.166
 * (REFERENCES.md §30), solved by bisection.
 */
export function cusumThreshold(k: number, arl0: number): number {
  const arl = (h: number): number => {
    const b = 2 * k * (h + 1.166);
    return (Math.exp(b) - b - 1) / (2 * k * k);
  };
  let lo = 0;
  let hi = 200;
  for (let i = 0; i < 100; i++) {
    const mid = 0.5 * (lo + hi);
    if (arl(mid) < arl0) lo = mid;
    else hi = mid;
  }
  return 0.5 * (lo + hi);
}

/** Creates the detector; throws RangeError naming a bad parameter. */
export function createLiveOnsetState(cfg: LiveOnsetConfig): LiveOnsetState {
  const fs = cfg.sampleRateHz;
  if (!(fs >= 500 && fs <= 192000)) throw new RangeError(`sampleRateHz must be 500-192000 Hz, got ${fs}`);
  if (!(cfg.bandLowHz > 0) || !(cfg.bandHighHz > cfg.bandLowHz)) throw new RangeError(`band must satisfy 0 < bandLowHz < bandHighHz, got ${cfg.bandLowHz}-${cfg.bandHighHz} Hz`);
  const n = Math.max(64, 2 ** Math.round(Math.log2(FRAME_S * fs)));
  const hop = n / HOPS_PER_FRAME;
  const spec = createSpectrumState({ sampleRateHz: fs, frameSize: n, hopSize: hop, averaged: false });
  const loBin = Math.max(1, Math.floor(cfg.bandLowHz / spec.binHz));
  const hiBin = Math.max(loBin, Math.min(spec.binCount - 2, Math.ceil(cfg.bandHighHz / spec.binHz)));
  const bins = hiBin - loBin + 1;
  const hopS = hop / fs;
  // One false alarm per FALSE_ALARM_HOURS over all bins: per-bin ARL0 = bins × hops per period.
  const arl0 = (bins * FALSE_ALARM_HOURS * 3600) / hopS;
  const runMax = Math.max(2 * HOPS_PER_FRAME, Math.round(RUN_MAX_S / hopS));
  return {
    spec,
    loBin,
    hiBin,
    hopS,
    threshold: cusumThreshold(CUSUM_K, arl0),
    alpha: hopS / BACKGROUND_S,
    warmFrames: Math.round(WARM_UP_S / hopS),
    runMax,
    mean: new Float64Array(bins),
    variance: new Float64Array(bins),
    cusum: new Float64Array(bins),
    runStart: new Float64Array(bins),
    holdUntil: new Float64Array(bins).fill(-1),
    sd: new Float64Array(bins),
    devRing: new Float64Array(bins * runMax),
    logPower: new Float64Array(bins),
    scratch: new Float64Array(bins),
    medianGuess: 0,
    medianHalfWidth: 0.1,
    bracket: new Float64Array(bins),
    winMean: new Float64Array(3),
    winVar: new Float64Array(3),
    frame: 0,
    j: 0,
    onsetJ: new Float64Array(MAX_ONSETS_PER_STEP),
    onsetFreqHz: new Float64Array(MAX_ONSETS_PER_STEP),
    onsetCount: 0,
    recentTimeS: new Float64Array(RECENT_CAPACITY).fill(-Infinity),
    recentFreqHz: new Float64Array(RECENT_CAPACITY),
    recentPos: 0,
  };
}

/** k-th smallest of a[0..n) (in place, Hoare's selection). */
function select(a: Float64Array, n: number, k: number): number {
  let lo = 0;
  let hi = n - 1;
  while (lo < hi) {
    const pivot = a[(lo + hi) >> 1];
    let i = lo;
    let j = hi;
    while (i <= j) {
      while (a[i] < pivot) i++;
      while (a[j] > pivot) j--;
      if (i <= j) {
        const t = a[i];
        a[i] = a[j];
        a[j] = t;
        i++;
        j--;
      }
    }
    if (k <= j) hi = j;
    else if (k >= i) lo = i;
    else return a[k];
  }
  return a[k];
}

/**
 * Median of the band's deviations a[0..n) (the k = n >> 1 smallest), found from a bracket
 * [guess − halfWidth, guess + halfWidth] around the last frame's median: one pass counts the
 * values below the bracket and copies those inside it to st.bracket; when the k-th value falls
 * inside, it is selected among those few, else among all (select, which reorders a). The value is
 * the same either way (Floyd and Rivest's bracket, REFERENCES.md §50); the bracket's width follows
 * how many values it caught.
 */
function bandMedian(st: LiveOnsetState, a: Float64Array, n: number): number {
  const k = n >> 1;
  const lo = st.medianGuess - st.medianHalfWidth;
  const hi = st.medianGuess + st.medianHalfWidth;
  const inside = st.bracket;
  let below = 0;
  let m = 0;
  for (let i = 0; i < n; i++) {
    const v = a[i];
    if (v < lo) below++;
    else if (v <= hi) inside[m++] = v;
  }
  let median: number;
  if (below <= k && k < below + m) {
    median = select(inside, m, k - below);
    if (m > 4 * MEDIAN_BRACKET_COUNT) st.medianHalfWidth *= 0.5;
  } else {
    median = select(a, n, k);
    st.medianHalfWidth *= 2;
  }
  if (m < MEDIAN_BRACKET_COUNT) st.medianHalfWidth *= 1.25;
  st.medianGuess = median;
  return median;
}

/**
 * True when bin b's deviation rose steadily over the run: three consecutive windows of W hops
 * (W ≥ half a kernel, a third of the run) whose means m3 < m2 < m1 step up by d2 = m2 − m3 and
 * d1 = m1 − m2, each more than RISE_Z sd of the difference and RISE_MIN_NP, and within a factor
 * RISE_RATIO of each other (a growth rises by the same amount in equal times; the rise of a step
 * seen through the Hann frame lasts one kernel and is front-loaded in log-power, so it falls
 * mostly in one window; a knock falls after it).
 */
function isRising(st: LiveOnsetState, b: number, len: number): boolean {
  const w = Math.max(HOPS_PER_FRAME >> 1, Math.floor(len / 3));
  if (3 * w > len || 3 * w > st.runMax) return false;
  const bins = st.hiBin - st.loBin + 1;
  const mean = st.winMean;
  const vari = st.winVar;
  for (let q = 0; q < 3; q++) {
    let s1 = 0;
    let s2 = 0;
    for (let i = 0; i < w; i++) {
      const v = st.devRing[((st.frame - q * w - i) % st.runMax) * bins + b];
      s1 += v;
      s2 += v * v;
    }
    mean[q] = s1 / w;
    vari[q] = Math.max(0, s2 / w - mean[q] * mean[q]) / Math.max(1, w - 1);
  }
  const d1 = mean[0] - mean[1];
  const d2 = mean[1] - mean[2];
  const need1 = Math.max(RISE_MIN_NP, RISE_Z * Math.sqrt(vari[0] + vari[1]));
  const need2 = Math.max(RISE_MIN_NP, RISE_Z * Math.sqrt(vari[1] + vari[2]));
  return d1 > need1 && d2 > need2 && d1 * RISE_RATIO >= d2 && d2 * RISE_RATIO >= d1;
}

/** True when bin b is the largest of the bins within PEAK_BINS of it (the skirt of a louder tone is not). */
function isPeak(st: LiveOnsetState, b: number): boolean {
  const p = st.spec.power;
  const k = st.loBin + b;
  for (let q = Math.max(1, k - PEAK_BINS); q <= Math.min(st.spec.binCount - 1, k + PEAK_BINS); q++) if (p[q] > p[k]) return false;
  return true;
}

function silenceAround(st: LiveOnsetState, b: number, until: number): void {
  const bins = st.hiBin - st.loBin + 1;
  const f = st.loBin + b;
  for (let h = 1; h <= MAX_HARMONIC; h++) {
    const c = h * f - st.loBin;
    if (c - HOLD_BINS >= bins) break;
    for (let q = Math.max(0, c - HOLD_BINS); q <= Math.min(bins - 1, c + HOLD_BINS); q++) {
      st.holdUntil[q] = until;
      st.cusum[q] = 0;
    }
  }
}

function processFrame(st: LiveOnsetState): void {
  const spec = st.spec;
  computeSpectrumFrame(spec);
  const bins = st.hiBin - st.loBin + 1;
  const p = spec.power;
  const lo = st.loBin;
  const frame = st.frame;
  const isWarm = frame >= st.warmFrames;
  const mean = st.mean;
  const variance = st.variance;
  const sdOf = st.sd;
  const cusum = st.cusum;
  const runStart = st.runStart;
  const logPower = st.logPower;
  const scratch = st.scratch;
  // Deviations from each bin's background and their median over the band.
  if (frame === 0) {
    for (let b = 0; b < bins; b++) {
      mean[b] = Math.log(p[lo + b] + 1e-30);
      variance[b] = 1.6449; // π²/6, the variance of ln of an exponential (REFERENCES.md §30)
      sdOf[b] = Math.max(SIGMA_MIN_NP, Math.sqrt(variance[b]));
    }
  }
  for (let b = 0; b < bins; b++) {
    const y = Math.log(p[lo + b] + 1e-30);
    logPower[b] = y;
    scratch[b] = y - mean[b];
  }
  const common = bandMedian(st, scratch, bins);
  // Deviations are stored frame-major: one contiguous row of bins per frame of the ring.
  const row = (frame % st.runMax) * bins;
  const devRing = st.devRing;
  // A plain running mean until the exponential one has as many frames behind it.
  const a = Math.max(st.alpha, 1 / (frame + 1));
  const threshold = st.threshold;
  for (let b = 0; b < bins; b++) {
    const y = logPower[b];
    const d = y - mean[b] - common;
    devRing[row + b] = d;
    // No run starts before the background has settled.
    const s = isWarm ? Math.max(0, cusum[b] + d / sdOf[b] - CUSUM_K) : 0;
    cusum[b] = s;
    if (s === 0) {
      // In control: the background follows (the common shift included, so it tracks loudness).
      runStart[b] = frame;
      mean[b] += a * (y - mean[b]);
      const v = variance[b] + a * (d * d - variance[b]);
      variance[b] = v;
      sdOf[b] = Math.max(SIGMA_MIN_NP, Math.sqrt(v));
      continue;
    }
    if (s <= threshold) continue;
    const len = Math.min(frame - runStart[b], st.runMax);
    if (frame >= st.holdUntil[b] && isPeak(st, b) && isRising(st, b, len)) {
      if (st.onsetCount < MAX_ONSETS_PER_STEP) {
        // The change point of the CUSUM: the last frame it stood at zero; its centre is where the rise began.
        const framesBack = frame - runStart[b];
        st.onsetJ[st.onsetCount] = st.j - spec.frameSize / 2 - framesBack * spec.hopSize;
        st.onsetFreqHz[st.onsetCount] = (lo + b) * spec.binHz;
        st.onsetCount++;
      }
      silenceAround(st, b, frame + Math.round(HOLD_S / st.hopS));
    } else if (len >= st.runMax) {
      // A rise that never showed itself as a growth is a new level: the bin takes it as background.
      mean[b] = y - common;
      cusum[b] = 0;
      runStart[b] = frame;
    }
  }
  st.frame++;
}

/**
 * Feeds conditioned samples x[start, end) and runs the test at every hop. Onsets found are left in
 * onsetJ / onsetFreqHz (onsetCount of them; reset at each call). Allocates nothing; never throws.
 */
export function stepLiveOnset(st: LiveOnsetState, x: Float32Array, start: number, end: number): void {
  st.onsetCount = 0;
  let i = start;
  while (i < end) {
    const k = Math.min(end - i, st.spec.toFrame);
    const due = feedSpectrum(st.spec, x, i, i + k);
    st.j += k;
    if (due) processFrame(st);
    i += k;
  }
}

/** After a gap in the input: framing restarts (the backgrounds are kept). */
export function gapLiveOnset(st: LiveOnsetState, jNext: number): void {
  resetSpectrumFraming(st.spec);
  st.j = jNext;
  st.cusum.fill(0);
  st.runStart.fill(st.frame);
}

/**
 * One announcement per rise, whichever detector saw it first: true (and remembered) when no
 * announcement within HOLD_BINS short bins (or 3 %) of freqHz was made in the HOLD_S before
 * timeS; false for a repeat.
 */
export function claimAnnouncement(st: LiveOnsetState, timeS: number, freqHz: number): boolean {
  const tol = Math.max(HOLD_BINS * st.spec.binHz, 0.03 * freqHz);
  for (let i = 0; i < RECENT_CAPACITY; i++) {
    if (Math.abs(st.recentTimeS[i] - timeS) <= HOLD_S && Math.abs(st.recentFreqHz[i] - freqHz) <= tol) return false;
  }
  st.recentTimeS[st.recentPos] = timeS;
  st.recentFreqHz[st.recentPos] = freqHz;
  st.recentPos = (st.recentPos + 1) % RECENT_CAPACITY;
  return true;
}
