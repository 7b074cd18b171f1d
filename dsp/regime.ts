/**
 * Stage 5, regime detection for one tone: quiet / growth / steady / decay from its envelope power
 * and the background power in the same narrow band, with the segments between state changes.
 *
 * Decisions use the excess x = 10 log10(A²/(N²·q)) of the envelope over the band background N²
 * (measured beside the tone in the spectrum, so it follows broadband loudness steps) times a quiet
 * baseline q (the mean ratio seen while quiet: 1 for white noise, larger when a noise-driven
 * resonance sits in the band). Thresholds are set against the envelope's own scatter: for noise
 * alone A² is exponentially distributed, P(A² > 16·mean) = e^−16, and neighbouring samples are
 * correlated over about 1/(2B) ≈ 0.1 s, so a 12 dB excess held 0.08 s does not arise from noise.
 * The regime only marks approximate boundaries; onset times and rates come from the fits.
 */
import type { RegimeKind } from './types';

export const STATE_QUIET = 0;
export const STATE_GROWTH = 1;
export const STATE_STEADY = 2;
export const STATE_DECAY = 3;
const KINDS: RegimeKind[] = ['quiet', 'growth', 'steady', 'decay'];

/** Regime kind of a state code. */
export function regimeKind(code: number): RegimeKind {
  return KINDS[code] ?? 'quiet';
}

/** Excess (dB) that declares growth out of quiet, and how long it must hold (s). */
export const ON_DB = 12;
const ON_HOLD_S = 0.08;
/** Excess at or below which the tone is taken as still at the background (growth start), dB. */
export const LOW_DB = 3;
/** Excess below which a decay has reached the background, dB, and the hold, s. */
const QUIET_DB = 6;
const QUIET_HOLD_S = 0.15;
/** Level change over FLAT_WINDOW_S below which growth has become steady, dB. */
const FLAT_DB = 1.5;
const FLAT_WINDOW_S = 1.0;
/** Shortest plateau at the end of a record taken as steady, s. */
const MIN_PLATEAU_S = 0.2;
/** Fall below the steady level (or growth maximum) that starts a decay, dB, and its hold, s. */
const DROP_DB = 6;
const DROP_HOLD_S = 0.1;
/** Rise above the decay minimum that restarts growth before the background is reached, dB. */
const REGROW_DB = 10;
/** Quiet time needed before a growth counts as an onset, s. */
const MIN_QUIET_S = 0.5;
/**
 * Warm-up at the start (and after a gap): the first WARMUP_S of valid envelope decide whether a
 * tone is already sounding (not noise-like, and at least START_DB over the band background in the
 * first WARMUP_HEAD_S) or the band is quiet (see endWarmup).
 */
const START_DB = 10;
const WARMUP_S = 2;
const WARMUP_HEAD_S = 0.3;
/** Fewest quiet samples before a rise within the warm-up's head that set the quiet level: the median of 8 independent exponential samples, over ln 2, is within a factor of two of their mean in 83 % of cases (by simulation). */
const WARMUP_LEAD_MIN = 8;
export const NOISE_TEST_LAG_S = 0.2;
/** Stretch at the start over which a sounding tone must look deterministic, s. */
const WARMUP_HEAD_D2_S = 1.0;
/** Mean square second difference of ln A² above which the envelope is noise (noise ≈ 6-10, tone < 1). */
export const NOISE_D2 = 2.5;
/** Time constant of the quiet baseline, s. */
const BASELINE_TAU_S = 3;
/** The excess thresholds as power ratios (the excess is compared as a ratio: no logarithm per sample). */
const ON_RATIO = 10 ** (ON_DB / 10);
const LOW_RATIO = 10 ** (LOW_DB / 10);
const QUIET_RATIO = 10 ** (QUIET_DB / 10);

/** A closed stretch of one regime, in envelope-sample indices of the track's store. */
export interface RegimeSegment {
  state: number;
  startIdx: number;
  /** Exclusive end. */
  endIdx: number;
  /** Growth out of a quiet stretch long enough to be an onset. */
  isOnset: boolean;
  /** For growth: the segment ran into a steady limit cycle. */
  reachedSteady: boolean;
  /** For decay: a ring-down after a step (an impulse response, line-class.ts), starting at the step. */
  isImpulse?: boolean;
}

export interface RegimeState {
  readonly rateHz: number;
  /** Current state; -1 before the first valid sample. */
  state: number;
  segStart: number;
  /** Quiet baseline (linear ratio). */
  baseline: number;
  baselineAlpha: number;
  onHold: number;
  onHoldMin: number;
  lastLowIdx: number;
  quietStartIdx: number;
  maxLevelDb: number;
  maxIdx: number;
  minLevelDb: number;
  minIdx: number;
  steadyLevelDb: number;
  /** The steady stretch is the limit cycle a growth of this tone reached (not a line that sounded faintly from the start). */
  isSteadyLimit: boolean;
  /** The quiet stretch began where a decay of this tone ended. */
  isQuietAfterDecay: boolean;
  lastHighIdx: number;
  /** Latest index at which a steady level was not above its average by more than FLAT_DB. */
  lastFlatIdx: number;
  dropHold: number;
  dropHoldMin: number;
  quietHold: number;
  quietHoldMin: number;
  quietHoldStart: number;
  regrowHold: number;
  growthIsOnset: boolean;
  /** Whether the next growth may be an onset (false for steady lines). */
  allowOnsets: boolean;
  /** Warm-up buffer: store indices, powers and backgrounds of the first samples. */
  warmIdx: Int32Array;
  warmP: Float64Array;
  warmBg: Float64Array;
  warmCount: number;
  /** Ring of recent levels (dB) for the flatness test. */
  levelRing: Float64Array;
  flatWindow: number;
  minQuiet: number;
  /** Closed segments. */
  segments: RegimeSegment[];
  /** Segments closed by the latest step (for live updates): count from the end of `segments`. */
  closedInStep: number;
  /** Set when a growth that counts as an onset was declared in the latest step. */
  onsetInStep: boolean;
  onsetIdx: number;
}

/** Creates the regime detector for envelope samples at rateHz. */
export function createRegimeState(rateHz: number, allowOnsets: boolean): RegimeState {
  const flatWindow = Math.max(2, Math.round(FLAT_WINDOW_S * rateHz));
  return {
    rateHz,
    state: -1,
    segStart: 0,
    baseline: 1,
    baselineAlpha: 1 - Math.exp(-1 / (BASELINE_TAU_S * rateHz)),
    onHold: 0,
    onHoldMin: Math.max(1, Math.round(ON_HOLD_S * rateHz)),
    lastLowIdx: 0,
    quietStartIdx: 0,
    maxLevelDb: -Infinity,
    maxIdx: 0,
    minLevelDb: Infinity,
    minIdx: 0,
    steadyLevelDb: 0,
    isSteadyLimit: false,
    isQuietAfterDecay: false,
    lastHighIdx: 0,
    lastFlatIdx: 0,
    dropHold: 0,
    dropHoldMin: Math.max(1, Math.round(DROP_HOLD_S * rateHz)),
    quietHold: 0,
    quietHoldMin: Math.max(1, Math.round(QUIET_HOLD_S * rateHz)),
    quietHoldStart: 0,
    regrowHold: 0,
    growthIsOnset: false,
    allowOnsets,
    warmIdx: new Int32Array(Math.max(4, Math.round(WARMUP_S * rateHz))),
    warmP: new Float64Array(Math.max(4, Math.round(WARMUP_S * rateHz))),
    warmBg: new Float64Array(Math.max(4, Math.round(WARMUP_S * rateHz))),
    warmCount: 0,
    levelRing: new Float64Array(flatWindow),
    flatWindow,
    minQuiet: Math.round(MIN_QUIET_S * rateHz),
    segments: [],
    closedInStep: 0,
    onsetInStep: false,
    onsetIdx: 0,
  };
}

function closeSegment(st: RegimeState, endIdx: number, isOnset: boolean, reachedSteady: boolean): void {
  if (endIdx > st.segStart) {
    st.segments.push({ state: st.state, startIdx: st.segStart, endIdx, isOnset, reachedSteady });
    st.closedInStep++;
  }
  st.segStart = endIdx;
}

function enterQuiet(st: RegimeState, idx: number): void {
  st.isQuietAfterDecay = st.state === STATE_DECAY;
  st.state = STATE_QUIET;
  st.quietStartIdx = idx;
  st.lastLowIdx = idx;
  st.onHold = 0;
}

function enterGrowth(st: RegimeState, startIdx: number, isOnset: boolean): void {
  st.state = STATE_GROWTH;
  st.growthIsOnset = isOnset;
  st.maxLevelDb = -Infinity;
  st.dropHold = 0;
  if (isOnset) {
    st.onsetInStep = true;
    st.onsetIdx = startIdx;
  }
}

function enterDecay(st: RegimeState): void {
  st.state = STATE_DECAY;
  st.minLevelDb = Infinity;
  st.quietHold = 0;
  st.regrowHold = 0;
}

/**
 * Mean square of the second difference ln p(i+lag) − 2 ln p(i) + ln p(i−lag) over i in
 * [from + lag, to − lag); NaN when there is no such i. The noise test of endWarmup (below) and
 * of the report's noise relabelling (noise-label.ts), with NOISE_D2 as threshold.
 */
export function logSecondDifferenceMs(p: ArrayLike<number>, from: number, to: number, lag: number): number {
  let d2 = 0;
  let cnt = 0;
  for (let i = from + lag; i + lag < to; i++) {
    const d = Math.log(Math.max(p[i + lag], 1e-30)) - 2 * Math.log(Math.max(p[i], 1e-30)) + Math.log(Math.max(p[i - lag], 1e-30));
    d2 += d * d;
    cnt++;
  }
  return cnt === 0 ? Number.NaN : d2 / cnt;
}

/**
 * Decides the initial state from the warm-up samples and replays them through the detector.
 * Noise (and a noise-driven resonance) makes ln A² jump about at random: with lags L longer than
 * the envelope's correlation time the second difference ln A²(t+L) − 2 ln A²(t) + ln A²(t−L) has
 * a mean square near 6·π²/6 ≈ 10 (ln of an exponential variable has variance π²/6); L = 0.2 s
 * exceeds the 1/(2B) = 0.1 s of band noise and leaves a resonance damped at 5 1/s (correlation
 * e^{−2αL} = 0.14) near 8. A tone well
 * over the band noise, steady or growing or decaying exponentially, has ln A² nearly straight
 * over such lags, so its mean square second difference stays under 1 (a kink adds little).
 */
function endWarmup(st: RegimeState): void {
  const n = st.warmCount;
  if (n === 0) return;
  const lag = Math.max(1, Math.round(NOISE_TEST_LAG_S * st.rateHz));
  // Mean square second difference of ln A² over warm-up samples [from, to).
  const secondDiff = (from: number, to: number): number => {
    const v = logSecondDifferenceMs(st.warmP, from, to, lag);
    return Number.isNaN(v) ? Infinity : v;
  };
  const isNoiseLike = secondDiff(0, n) > NOISE_D2;
  // The first WARMUP_HEAD_S: is a tone already sounding? (Judged on the head alone, so a tone
  // that sounds at the start and then dies into the noise within the warm-up still counts.)
  const head = Math.max(1, Math.min(n, Math.round(WARMUP_HEAD_S * st.rateHz)));
  let headSum = 0;
  for (let i = 0; i < head; i++) headSum += st.warmBg[i] > 0 ? st.warmP[i] / st.warmBg[i] : 1;
  const headExcessDb = 10 * Math.log10(Math.max(headSum / head, 1e-30));
  const headIsTone = headExcessDb >= START_DB && secondDiff(0, Math.min(n, Math.round(WARMUP_HEAD_D2_S * st.rateHz))) <= NOISE_D2;
  const first = st.warmIdx[0];
  st.segStart = first;
  if (headIsTone) {
    st.state = STATE_STEADY;
    st.isSteadyLimit = false;
    st.steadyLevelDb = 10 * Math.log10(Math.max(st.warmP[0], 1e-30));
    st.lastHighIdx = first;
    st.lastFlatIdx = first;
    st.regrowHold = 0;
    st.dropHold = 0;
  } else {
    // Quiet: the baseline is the band's own level while quiet (median / ln 2 of the exponential
    // A²), from the whole warm-up when it is noise, from its head when a tone rises later in it.
    // A head START_DB over the background that is no steady tone, whose first samples are quiet,
    // holds a hum rising in it (a track started on history just as a hum began): the baseline is
    // then the level of those first samples, before the samples that stand ON_DB over the
    // background, so that the hum does not set the quiet level.
    const ratioAt = (i: number): number => (st.warmBg[i] > 0 ? st.warmP[i] / st.warmBg[i] : 1);
    const medianLevel = (from: number, to: number, below: number): number => {
      const ratios: number[] = [];
      for (let i = from; i < to; i++) if (ratioAt(i) < below) ratios.push(ratioAt(i));
      ratios.sort((a, b) => a - b);
      return ratios.length > 0 ? ratios[Math.floor(ratios.length / 2)] / Math.LN2 : Number.NaN;
    };
    let m = isNoiseLike ? n : head;
    if (headExcessDb >= START_DB) {
      let lead = 0;
      while (lead < head && ratioAt(lead) < ON_RATIO) lead++;
      if (lead >= WARMUP_LEAD_MIN) m = lead;
    }
    // A noise-like warm-up whose head is quiet may still hold a hum rising after the head (the
    // noisy head makes the whole look like noise): its samples ON_DB over the head's level are no
    // quiet (for noise alone that leaves out a share e^−16 of them).
    const isHeadQuiet = isNoiseLike && !(headExcessDb >= START_DB);
    st.baseline = Math.max(0.25, medianLevel(0, m, isHeadQuiet ? ON_RATIO * medianLevel(0, head, Infinity) : Infinity));
    enterQuiet(st, first);
  }
  st.warmCount = 0;
  for (let i = 0; i < n; i++) stepCore(st, st.warmIdx[i], st.warmP[i], st.warmBg[i]);
}

/**
 * Feeds envelope sample idx (its store index) with tone power p and band background bg (same
 * units). Segments that close are appended to st.segments. Allocates only when a segment closes
 * or the warm-up ends.
 */
export function stepRegime(st: RegimeState, idx: number, p: number, bg: number): void {
  if (st.state < 0) {
    const k = st.warmCount++;
    st.warmIdx[k] = idx;
    st.warmP[k] = p;
    st.warmBg[k] = bg;
    if (st.warmCount === st.warmIdx.length) endWarmup(st);
    return;
  }
  stepCore(st, idx, p, bg);
}

function stepCore(st: RegimeState, idx: number, p: number, bg: number): void {
  const levelDb = 10 * Math.log10(p > 1e-30 ? p : 1e-30);
  const ratio = bg > 0 ? p / bg : 1;
  const ring = st.levelRing;
  const w = st.flatWindow;
  const ago = ring[idx % w];
  const haveWindow = idx - st.segStart >= w;
  ring[idx % w] = levelDb;
  // The excess over the quiet baseline as a power ratio (compared with the thresholds' ratios).
  const excess = ratio / st.baseline;

  switch (st.state) {
    case STATE_QUIET: {
      // Winsorised update: a rising tone cannot pull the baseline up by more than a few dB.
      st.baseline += st.baselineAlpha * (Math.min(ratio, 4 * st.baseline) - st.baseline);
      if (excess <= LOW_RATIO) st.lastLowIdx = idx;
      if (excess >= ON_RATIO) st.onHold++;
      else st.onHold = 0;
      if (st.onHold >= st.onHoldMin) {
        const start = Math.max(st.lastLowIdx, st.segStart);
        // An onset after enough quiet to tell it from the band's flicker, or after any quiet that a
        // decay of this tone led into (the hum returned soon after it died away).
        const isOnset = st.allowOnsets && (start - st.quietStartIdx >= st.minQuiet || st.isQuietAfterDecay);
        closeSegment(st, start, false, false);
        enterGrowth(st, start, isOnset);
      }
      break;
    }
    case STATE_GROWTH: {
      if (levelDb > st.maxLevelDb) {
        st.maxLevelDb = levelDb;
        st.maxIdx = idx;
      }
      if (levelDb < st.maxLevelDb - DROP_DB) st.dropHold++;
      else st.dropHold = 0;
      if (st.dropHold >= st.dropHoldMin) {
        closeSegment(st, st.maxIdx + 1, st.growthIsOnset, false);
        enterDecay(st);
        break;
      }
      if (haveWindow && Math.abs(levelDb - ago) < FLAT_DB && levelDb >= st.maxLevelDb - 1) {
        // Steady from where the level first came within FLAT_DB of the present one.
        let start = idx;
        for (let k = 1; k < w; k++) {
          const j = idx - k;
          if (j <= st.segStart) break;
          if (Math.abs(ring[j % w] - levelDb) >= FLAT_DB) break;
          start = j;
        }
        closeSegment(st, start, st.growthIsOnset, true);
        st.state = STATE_STEADY;
        st.isSteadyLimit = true;
        st.steadyLevelDb = levelDb;
        st.lastHighIdx = idx;
        st.lastFlatIdx = idx;
        st.regrowHold = 0;
        st.dropHold = 0;
      }
      break;
    }
    case STATE_STEADY: {
      // Slow average of the limit-cycle level (time constant about the flatness window).
      st.steadyLevelDb += (levelDb - st.steadyLevelDb) / w;
      if (levelDb >= st.steadyLevelDb - FLAT_DB) st.lastHighIdx = idx;
      if (levelDb <= st.steadyLevelDb + FLAT_DB) st.lastFlatIdx = idx;
      // A faint tone that starts to grow: the same rise as a re-growth after a decay (REGROW_DB
      // over its level, clear of the background), from where it last held its level. From a line
      // that sounded faintly (not a limit cycle this tone grew into) the hum sets in there: an
      // onset; from a limit cycle it is a growth to a higher one, not an onset.
      if (levelDb > st.steadyLevelDb + REGROW_DB && excess >= ON_RATIO) st.regrowHold++;
      else st.regrowHold = 0;
      if (st.regrowHold >= st.onHoldMin) {
        const start = Math.max(st.lastFlatIdx + 1, st.segStart);
        closeSegment(st, start, false, false);
        st.regrowHold = 0;
        enterGrowth(st, start, st.allowOnsets && !st.isSteadyLimit);
        break;
      }
      if (levelDb < st.steadyLevelDb - DROP_DB) st.dropHold++;
      else st.dropHold = 0;
      if (st.dropHold >= st.dropHoldMin) {
        closeSegment(st, st.lastHighIdx + 1, false, false);
        enterDecay(st);
      }
      break;
    }
    case STATE_DECAY: {
      if (levelDb < st.minLevelDb) {
        st.minLevelDb = levelDb;
        st.minIdx = idx;
      }
      if (excess < QUIET_RATIO) {
        if (st.quietHold === 0) st.quietHoldStart = idx;
        st.quietHold++;
      } else st.quietHold = 0;
      if (st.quietHold >= st.quietHoldMin) {
        closeSegment(st, st.quietHoldStart, false, false);
        enterQuiet(st, st.quietHoldStart);
        break;
      }
      // Re-growth must also stand clear of the background (a dip of the noise is not a minimum).
      if (levelDb > st.minLevelDb + REGROW_DB && excess >= ON_RATIO) st.regrowHold++;
      else st.regrowHold = 0;
      if (st.regrowHold >= st.onHoldMin) {
        // The hum sets in again before it died away (the driving came back): an onset, at the
        // turn from decay to growth.
        closeSegment(st, st.minIdx, false, false);
        enterGrowth(st, st.minIdx, st.allowOnsets);
      }
      break;
    }
    default:
      break;
  }
}

/** Starts a fresh regime after a gap: the next valid sample decides quiet or already sounding. */
export function restartRegime(st: RegimeState, idx: number): void {
  if (st.state < 0) endWarmup(st);
  if (st.state >= 0) closeSegment(st, idx, st.state === STATE_GROWTH && st.growthIsOnset, false);
  st.state = -1;
  st.baseline = 1;
}

/** Closes the open segment at the end of the record (exclusive end idx). */
export function finishRegime(st: RegimeState, endIdx: number): void {
  if (st.state < 0) endWarmup(st);
  if (st.state === STATE_GROWTH) {
    // A record that ends shortly after the tone levelled off: the plateau (shorter than the
    // flatness window) is steady, not growth.
    const w = st.flatWindow;
    const last = endIdx - 1;
    const final = st.levelRing[last % w];
    let start = endIdx;
    for (let k = 0; k < w; k++) {
      const j = last - k;
      if (j <= st.segStart) break;
      if (Math.abs(st.levelRing[j % w] - final) >= FLAT_DB) break;
      start = j;
    }
    if (endIdx - start >= Math.round(MIN_PLATEAU_S * st.rateHz) && final >= st.maxLevelDb - FLAT_DB) {
      closeSegment(st, start, st.growthIsOnset, true);
      st.state = STATE_STEADY;
    }
  }
  if (st.state >= 0) closeSegment(st, endIdx, st.state === STATE_GROWTH && st.growthIsOnset, false);
  st.state = -1;
}

/** Clears the per-step flags (call before a batch of steps). */
export function beginRegimeStep(st: RegimeState): void {
  st.closedInStep = 0;
  st.onsetInStep = false;
}
