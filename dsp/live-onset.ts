/**
 * Live onset detector (docs/REFERENCES.md §30, §45), the one source of live onsets: a short-frame
 * sequential test that announces a hum while it grows, without waiting for the long analysis frame.
 *
 * Every hop of a short Hann frame gives the power of each bin of the band. Each bin keeps a running
 * background mean while it is in control; its power over that mean, divided by the band's median of
 * the same ratio (a broadband loudness step scales every bin alike and so cancels), is x, an
 * exponential variable of mean 1 for noise and 1 + s for a tone at SNR s. Page's one-sided CUSUM
 * runs on the log-likelihood ratio of mean 1 + s1 against mean 1,
 * S = max(0, S + x·s1/(1+s1) − ln(1+s1)) (Page 1954; Lorden 1971). Its threshold h is set so that
 * all bins together give at most one false alarm in FALSE_ALARM_HOURS of toneless noise (Lorden's
 * bound ARL0 ≥ e^h, scaled by the overlapping frames' variance inflation); the design SNR s1 makes
 * a tone at it reach h within one e-folding time of the fastest growth (RATE_MAX_PER_S).
 *
 * A CUSUM alarm is an onset only when the rise goes on for longer than the short kernel: three
 * consecutive windows of the run step up by similar, significant amounts (isRising). A step (a line
 * or mains switched on, a loudness change) rises within one kernel and then holds; a knock rises
 * within one kernel and then decays: neither passes, and once the step has wholly entered the
 * frame the bin takes its new level as its background and starts a fresh run, so a tone that
 * enters well above the noise and then grows is announced by its growth. A growth rises steadily
 * and passes.
 *
 * State is allocated once by createLiveOnsetState; stepLiveOnset allocates nothing.
 */
import { designSnr, overlapInflation, riseErrorFactors, thresholdFor } from './live-onset-statistics';
import { commonLevel, createCommonLevel, isOnSkirt, type CommonLevel } from './live-onset-level';
import { computeSpectrumFrame, createSpectrumState, feedSpectrum, resetSpectrumFraming, type SpectrumState } from './spectrum';

/** Short frame, s (rounded to a power of two of samples): 16 ms, under one e-folding time of a 50 1/s growth. */
const FRAME_S = 0.016;
/** Hops per frame (the kernel spans this many hops). */
const HOPS_PER_FRAME = 4;
/** Background time constant, s: long against a growth's rise, short against a session. */
const BACKGROUND_S = 3;
/** Warm-up before any alarm, s: the background means need a few hundred frames. */
const WARM_UP_S = 2;
/** All bins together give at most one false CUSUM alarm in this many hours of toneless noise. */
const FALSE_ALARM_HOURS = 1;
/** Fastest growth announced within its first e-folds, 1/s: the CUSUM's design shift is set by it (see designSnr). */
const RATE_MAX_PER_S = 50;
/**
 * A rise over one frame length of more than 2·STEP_RATE_FACTOR·RATE_MAX_PER_S·frame nepers of power
 * (4.8 Np, 21 dB, for a 16 ms frame) marks a step or a knock: a growth at RATE_MAX_PER_S rises
 * 2·RATE_MAX_PER_S·frame (1.6 Np). The earlier frame is read as no lower than the background, so
 * noise alone cannot mark it (an exponential power exceeds e^4.8 = 121 times its mean with
 * probability e^−121); a fast growth's earlier frame reads below its mean by the remaining factor
 * e^3.2 = 25 only at an SNR under about 1 (probability of a power under 1/25 of its mean ≈ 4 %),
 * where the later frame cannot yet stand 4.8 Np over the background.
 */
const STEP_RATE_FACTOR = 3;
/**
 * Relative margin of the step test's screen in ratios (isStepRise): a speed choice only, far
 * beyond the rounding of the logs it stands in for, so the test's answers are those in logs.
 */
const STEP_SCREEN_MARGIN = 1e-9;
/** Least rise between two consecutive windows of a run for an onset, Np (about 1 dB of power). */
const RISE_MIN_NP = 0.25;
/**
 * The rise must also exceed this many standard errors of the difference of the window means. The
 * CUSUM alarm already holds toneless noise to FALSE_ALARM_HOURS; this test only tells a steady
 * rise from a step's or a knock's bend: two rises each beyond 2 standard errors (one-sided 2.3 %
 * each, about 5·10⁻⁴ together for noise) add at most that fraction to the alarms announced.
 */
const RISE_Z = 2;
/** The rises of two consecutive windows agree within this factor (a steady exponential rise). */
const RISE_RATIO = 2;
/** An onset bin is the largest within this many bins (a louder tone's skirt rises with it but is no peak). */
const PEAK_BINS = 2;
/**
 * Hops the CUSUM must stand at zero in a row before a new run starts (four frame lengths, 64 ms):
 * a growth still near the noise has increments of mean 0.9·(1 + s) − 2.3 (s1 ≈ 9), below zero
 * until its SNR s passes about 1.6, so its sum keeps dropping back to zero for a few hops at a
 * time; its rise is judged from where it began, not from the latest dip. Before a step there is
 * only background, where noise lifts the sum off zero in 8 % of hops (e^−2.56), so a run still
 * starts within a hop or two of the step.
 */
const RESTART_HOPS = 4 * HOPS_PER_FRAME;
/** Longest run examined, s: a rise that has not shown itself as a growth by then is a new level. */
const RUN_MAX_S = 1.2;
/** After an onset, bins within this many bins of it (and of its harmonics) stay silent this long, s. */
const HOLD_BINS = 3;
const HOLD_S = 3;
const MAX_HARMONIC = 10;
/** Most onsets announced by one step. */
const MAX_ONSETS_PER_STEP = 8;

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
  /** CUSUM threshold h, nats of log-likelihood ratio (thresholdFor). */
  readonly threshold: number;
  /** Design SNR s1 of the CUSUM (designSnr): increment x·s1/(1+s1) − ln(1+s1). */
  readonly slope: number;
  readonly offset: number;
  readonly alpha: number;
  readonly warmFrames: number;
  readonly runMax: number;
  /** Background mean power of each bin (in control), spectrum units. */
  mean: Float64Array;
  cusum: Float64Array;
  /**
   * Frame at which each bin's run began: the CUSUM's last zero after a whole frame length at zero.
   * This, lastZero and isStepRun are brought up to date when a stretch at zero ends (closeZeroStretch).
   */
  runStart: Float64Array;
  /** Hops each bin's CUSUM has stood at zero in a row, and the last frame it stood at zero. */
  zeroHops: Int32Array;
  lastZero: Float64Array;
  /** 1 while a bin's run holds a rise over one frame length steeper than any growth (stepNp), and the frame that showed it. */
  isStepRun: Uint8Array;
  stepFrame: Float64Array;
  /** Least rise over one frame length that marks a step, Np (STEP_RATE_FACTOR). */
  readonly stepNp: number;
  /** Ratio under which no rise reaches stepNp (isStepRise): e^stepNp·(1 − STEP_SCREEN_MARGIN). */
  readonly stepRatioScreen: number;
  /**
   * Background mean power of each bin before a rise took its mean over (an onset, or a new level
   * taken as background); 0 when none. The bin returns to it when its recent power falls below it.
   */
  floor: Float64Array;
  /**
   * Power of each bin averaged over about RESTART_HOPS hops (exponentially): a tone still a few dB
   * over the noise keeps it above the floor, noise alone brings it below within a few such spans.
   */
  recent: Float64Array;
  /** Frame until which each bin stays silent after an onset at a fundamental of it. */
  holdUntil: Float64Array;
  /** Bin of an onset whose return to its floor ends this bin's silence (−1: none). */
  heldBy: Int32Array;
  /** Power over the background per bin (ring of runMax frames, frame-major: one frame's bins are adjacent). */
  ratioRing: Float64Array;
  /**
   * Its natural log (Np), taken only where read (logRatioAt): in control a bin never needs it. An
   * entry is valid when logFrame holds the frame it was taken for.
   */
  logRing: Float64Array;
  logFrame: Float64Array;
  /** The latest frame's power of each bin (+1e-30). */
  band: Float64Array;
  /** The band's common level (dsp/live-onset-level.ts). */
  level: CommonLevel;
  winMean: Float64Array;
  /** var(m1 − m2) / E[RSS] of the rise test for each window length (riseErrorFactors). */
  readonly riseFactor: Float64Array;
  frame: number;
  /** Analysis index of the next sample. */
  j: number;
  /** Onsets of the latest step: analysis sample index where the rise began, and frequency, Hz. */
  onsetJ: Float64Array;
  onsetFreqHz: Float64Array;
  onsetCount: number;
}

/** Creates the detector; throws RangeError naming a bad parameter. */
export function createLiveOnsetState(cfg: LiveOnsetConfig): LiveOnsetState {
  const fs = cfg.sampleRateHz;
  if (!(fs >= 500 && fs <= 192000)) throw new RangeError(`sampleRateHz must be 500-192000 Hz, got ${fs}`);
  if (!(cfg.bandLowHz > 0) || !(cfg.bandHighHz > cfg.bandLowHz)) throw new RangeError(`band must satisfy 0 < bandLowHz < bandHighHz, got ${cfg.bandLowHz}-${cfg.bandHighHz} Hz`);
  const n = Math.max(64, 2 ** Math.round(Math.log2(FRAME_S * fs)));
  const hop = n / HOPS_PER_FRAME;
  // Only each frame's power is read: no averaged spectrum.
  const spec = createSpectrumState({ sampleRateHz: fs, frameSize: n, hopSize: hop, averaged: false });
  const loBin = Math.max(1, Math.floor(cfg.bandLowHz / spec.binHz));
  const hiBin = Math.max(loBin, Math.min(spec.binCount - 2, Math.ceil(cfg.bandHighHz / spec.binHz)));
  const bins = hiBin - loBin + 1;
  const hopS = hop / fs;
  // One false alarm per FALSE_ALARM_HOURS over all bins: per-bin ARL0 = bins × hops per period.
  const arl0 = (bins * FALSE_ALARM_HOURS * 3600) / hopS;
  const inflation = overlapInflation(spec.window, hop);
  const threshold = thresholdFor(arl0, inflation);
  const s1 = designSnr(threshold, hopS, RATE_MAX_PER_S);
  const runMax = Math.max(2 * HOPS_PER_FRAME, Math.round(RUN_MAX_S / hopS));
  const stepNp = 2 * STEP_RATE_FACTOR * RATE_MAX_PER_S * (n / fs);
  return {
    spec,
    loBin,
    hiBin,
    hopS,
    threshold,
    slope: s1 / (1 + s1),
    offset: Math.log1p(s1),
    alpha: hopS / BACKGROUND_S,
    warmFrames: Math.round(WARM_UP_S / hopS),
    runMax,
    mean: new Float64Array(bins),
    cusum: new Float64Array(bins),
    runStart: new Float64Array(bins),
    zeroHops: new Int32Array(bins),
    lastZero: new Float64Array(bins),
    isStepRun: new Uint8Array(bins),
    stepFrame: new Float64Array(bins),
    stepNp,
    stepRatioScreen: Math.exp(stepNp) * (1 - STEP_SCREEN_MARGIN),
    floor: new Float64Array(bins),
    recent: new Float64Array(bins),
    holdUntil: new Float64Array(bins).fill(-1),
    heldBy: new Int32Array(bins).fill(-1),
    ratioRing: new Float64Array(bins * runMax),
    logRing: new Float64Array(bins * runMax),
    logFrame: new Float64Array(bins * runMax).fill(-1),
    band: new Float64Array(bins),
    level: createCommonLevel(bins),
    winMean: new Float64Array(3),
    riseFactor: riseErrorFactors(spec.window, hop, Math.floor(runMax / 3)),
    frame: 0,
    j: 0,
    onsetJ: new Float64Array(MAX_ONSETS_PER_STEP),
    onsetFreqHz: new Float64Array(MAX_ONSETS_PER_STEP),
    onsetCount: 0,
  };
}

/** Ln of bin b's power over its background at frame f (one of the last runMax frames), taken once. */
function logRatioAt(st: LiveOnsetState, b: number, f: number): number {
  const i = (f % st.runMax) * (st.hiBin - st.loBin + 1) + b;
  if (st.logFrame[i] !== f) {
    st.logRing[i] = Math.log(st.ratioRing[i]);
    st.logFrame[i] = f;
  }
  return st.logRing[i];
}

/**
 * True when bin b rose by more than stepNp over the last frame length, its earlier frame read as
 * no lower than the background: ln r(f) − max(0, ln r(f − kernel)) > stepNp. Most alarms rise far
 * less, which the ratios themselves show without a log: r(f) < max(1, r(f − kernel))·e^stepNp·(1 − ε),
 * ε = STEP_SCREEN_MARGIN, puts the difference of the logs ε under stepNp, far beyond their
 * rounding (a few ulps of logs of doubles, under 745: about 1e-13), so the screen never changes
 * the answer in logs.
 */
function isStepRise(st: LiveOnsetState, b: number, f: number): boolean {
  const bins = st.hiBin - st.loBin + 1;
  const now = st.ratioRing[(f % st.runMax) * bins + b];
  const before = st.ratioRing[((f - HOPS_PER_FRAME) % st.runMax) * bins + b];
  if (now < Math.max(1, before) * st.stepRatioScreen) return false;
  return logRatioAt(st, b, f) - Math.max(0, logRatioAt(st, b, f - HOPS_PER_FRAME)) > st.stepNp;
}

/**
 * True when bin b's log-power rose steadily over the last 3W hops: three consecutive windows of W
 * hops whose means m3 < m2 < m1 step up by d2 = m2 − m3 and d1 = m1 − m2, each more than RISE_Z
 * standard errors of the difference and RISE_MIN_NP, and within a factor RISE_RATIO of each other.
 * The noise is the scatter about the straight line fitted through the 3W points (a growth is a
 * straight line in log-power; the scatter of a step's or a knock's bend about it counts as
 * noise), its standard error from the overlap correlation of the frames (riseErrorFactors). The smallest W
 * (from half a kernel up to a third of the run) that shows the rise decides: a fast growth shows
 * it in short windows, a slow one in long ones. A step seen through the Hann frame rises within one
 * kernel, front-loaded in log-power, so its rise falls mostly in one window; a knock falls after it.
 */
function isRising(st: LiveOnsetState, b: number, len: number): boolean {
  const mean = st.winMean;
  const wMax = Math.floor(Math.min(len, st.runMax) / 3);
  for (let w = HOPS_PER_FRAME >> 1; w <= wMax; w++) {
    // Least-squares line through the 3w points (t = 0 the newest, going back).
    const n = 3 * w;
    let sy = 0;
    let sty = 0;
    let syy = 0;
    for (let q = 0; q < 3; q++) {
      let s1 = 0;
      for (let i = 0; i < w; i++) {
        const t = q * w + i;
        const v = logRatioAt(st, b, st.frame - t);
        s1 += v;
        sty += t * v;
        syy += v * v;
      }
      mean[q] = s1 / w;
      sy += s1;
    }
    const st0 = (n * (n - 1)) / 2;
    const stt = ((n - 1) * n * (2 * n - 1)) / 6;
    const slope = (n * sty - st0 * sy) / (n * stt - st0 * st0);
    const icpt = (sy - slope * st0) / n;
    // Residual sum of squares: Σy² − a·Σy − b·Σty for the least-squares line.
    const rss = Math.max(0, syy - icpt * sy - slope * sty);
    const seDiff = Math.sqrt(st.riseFactor[w] * rss);
    const need = Math.max(RISE_MIN_NP, RISE_Z * seDiff);
    const d1 = mean[0] - mean[1];
    const d2 = mean[1] - mean[2];
    if (d1 > need && d2 > need && d1 * RISE_RATIO >= d2 && d2 * RISE_RATIO >= d1) return true;
  }
  return false;
}

/** True when bin b is the largest of the bins within PEAK_BINS of it (the skirt of a louder tone is not). */
function isPeak(st: LiveOnsetState, b: number): boolean {
  const p = st.spec.power;
  const k = st.loBin + b;
  for (let q = Math.max(1, k - PEAK_BINS); q <= Math.min(st.spec.binCount - 1, k + PEAK_BINS); q++) if (p[q] > p[k]) return false;
  return true;
}

/**
 * After an onset in bin b: the bins of the tone itself (within HOLD_BINS: its skirt and sidelobes)
 * stay silent until b's power falls back to the background it had before the onset (the hum has
 * gone: a new cycle may follow at once); its harmonics' bins stay silent for HOLD_S (a harmonic
 * grows with the tone).
 */
function silenceAround(st: LiveOnsetState, b: number, until: number): void {
  const bins = st.hiBin - st.loBin + 1;
  const f = st.loBin + b;
  for (let h = 1; h <= MAX_HARMONIC; h++) {
    const c = h * f - st.loBin;
    if (c - HOLD_BINS >= bins) break;
    for (let q = Math.max(0, c - HOLD_BINS); q <= Math.min(bins - 1, c + HOLD_BINS); q++) {
      if (h === 1) st.heldBy[q] = b;
      else st.holdUntil[q] = Math.max(st.holdUntil[q], until);
      st.cusum[q] = 0;
    }
  }
  keepFloor(st, b);
}

/** Remembers bin q's background before a rise takes over its mean (once per rise). */
function keepFloor(st: LiveOnsetState, q: number): void {
  if (st.floor[q] === 0) st.floor[q] = st.mean[q];
}

/** The band's common level of the latest frame (dsp/live-onset-level.ts), which fills st.band with each bin's power. */
function bandLevel(st: LiveOnsetState): number {
  const bins = st.hiBin - st.loBin + 1;
  const p = st.spec.power;
  const loBin = st.loBin;
  const mean = st.mean;
  const band = st.band;
  if (st.frame === 0) for (let b = 0; b < bins; b++) mean[b] = p[loBin + b] + 1e-30;
  return commonLevel(st.level, p, loBin, band, mean, bins);
}

/**
 * Bin b's stretch of zeroHops hops at zero ends before `frame` (an alarm, or a gap): what the
 * stretch implies, set here once rather than at every hop in control. Its last zero was the frame
 * before; a stretch of RESTART_HOPS or more started a new run there, not a step.
 */
function closeZeroStretch(st: LiveOnsetState, b: number, frame: number): void {
  const z = st.zeroHops[b];
  if (z === 0) return;
  st.lastZero[b] = frame - 1;
  if (z >= RESTART_HOPS) {
    st.runStart[b] = frame - 1;
    st.isStepRun[b] = 0;
  }
  st.zeroHops[b] = 0;
}

/**
 * Bin b's CUSUM s stands above zero at power pw (loudness-corrected): a rise faster than any growth
 * marks the run as a step; at the threshold a steady rise is an onset, and a run that never
 * showed itself as a growth makes its level the bin's background.
 */
function onAlarm(st: LiveOnsetState, b: number, pw: number, s: number): void {
  const frame = st.frame;
  closeZeroStretch(st, b, frame);
  // A run that rose faster than any growth (a step or a knock entering the frame) is never an onset.
  if (st.isStepRun[b] === 0 && frame >= HOPS_PER_FRAME && isStepRise(st, b, frame)) {
    st.isStepRun[b] = 1;
    st.stepFrame[b] = frame;
  } else if (st.isStepRun[b] === 1 && frame - st.stepFrame[b] >= HOPS_PER_FRAME) {
    // The step has wholly entered the frame: its level is the bin's background and a fresh run
    // starts from it, so a tone that enters well above the noise and then grows is judged by its
    // growth (a step that holds, or a knock that decays, gives no rise after it).
    restartAt(st, b, pw, frame);
    st.isStepRun[b] = 0;
    st.lastZero[b] = frame;
    return;
  }
  if (s < st.threshold) return;
  const len = Math.min(frame - st.runStart[b], st.runMax);
  if (frame >= st.holdUntil[b] && st.heldBy[b] < 0 && st.isStepRun[b] === 0 && isPeak(st, b) && !isOnSkirt(st.level, st.band, b) && isRising(st, b, len)) {
    if (st.onsetCount < MAX_ONSETS_PER_STEP) {
      // The change point of the CUSUM: the last frame it stood at zero; its centre is where the rise began.
      const framesBack = frame - st.lastZero[b];
      st.onsetJ[st.onsetCount] = st.j - st.spec.frameSize / 2 - framesBack * st.spec.hopSize;
      st.onsetFreqHz[st.onsetCount] = (st.loBin + b) * st.spec.binHz;
      st.onsetCount++;
    }
    silenceAround(st, b, frame + Math.round(HOLD_S / st.hopS));
  } else if (len >= st.runMax) {
    // A rise that never showed itself as a growth is a new level.
    restartAt(st, b, pw, frame);
  }
}

/** Bin b takes power pw as its background, until its power falls back to the one before, and its run starts afresh. */
function restartAt(st: LiveOnsetState, b: number, pw: number, frame: number): void {
  keepFloor(st, b);
  st.mean[b] = pw;
  st.cusum[b] = 0;
  st.runStart[b] = frame;
}

function processFrame(st: LiveOnsetState): void {
  computeSpectrumFrame(st.spec);
  const common = bandLevel(st);
  const bins = st.hiBin - st.loBin + 1;
  const frame = st.frame;
  const isWarm = frame >= st.warmFrames;
  const { mean, band, recent, floor, cusum, ratioRing, zeroHops, runMax, threshold, slope, offset } = st;
  const slot = (frame % runMax) * bins;
  // A plain running mean until the exponential one has as many frames behind it.
  const follow = Math.max(st.alpha, 1 / (frame + 1));
  for (let b = 0; b < bins; b++) {
    const pw = band[b] / common;
    const r = recent[b] + (pw - recent[b]) / RESTART_HOPS;
    recent[b] = r;
    if (floor[b] > 0 && r < floor[b]) {
      // Back at the background it had before a rise (a hum or a line has gone): it is the
      // background again, and a tone held silent since its onset may be announced anew.
      mean[b] = Math.min(mean[b], floor[b]);
      floor[b] = 0;
      for (let q = Math.max(0, b - HOLD_BINS); q <= Math.min(bins - 1, b + HOLD_BINS); q++) if (st.heldBy[q] === b) st.heldBy[q] = -1;
    }
    const x = pw / mean[b];
    ratioRing[slot + b] = x;
    // No run starts before the background has settled.
    // Evidence past the threshold is not banked (the sum is held at h): an alarm that is not
    // confirmed as a growth ends within hops of the increments turning negative (a knock's tail,
    // a skirt that fades), instead of testing noise for as long as a huge sum takes to drain.
    const s = isWarm ? Math.min(threshold, Math.max(0, cusum[b] + slope * x - offset)) : 0;
    cusum[b] = s;
    if (s > 0) onAlarm(st, b, pw, s);
    else if (s === 0) {
      // In control: the background follows (loudness-corrected). A run starts afresh only after
      // RESTART_HOPS at zero (see there and closeZeroStretch).
      zeroHops[b]++;
      mean[b] += follow * (pw - mean[b]);
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
  for (let b = 0; b < st.cusum.length; b++) closeZeroStretch(st, b, st.frame);
  st.runStart.fill(st.frame);
  st.zeroHops.fill(0);
  st.lastZero.fill(st.frame);
}
