/**
 * Stage 3b, tone tracking: continuity of spectral peaks across frames. Fundamentals found by
 * peak.ts are matched to the existing tracks (nearest within a tolerance); unmatched strong peaks
 * start tentative tracks, which are confirmed after hits in consecutive frames. Several tracks run
 * at once. A confirmed track keeps its frequency history; which tracks live on is decided by the
 * pipeline (which knows their envelopes).
 */
import type { PeakList } from './peak';

/** Frames in a row a tentative peak must be seen before it becomes a track. */
export const CONFIRM_HITS = 3;
/** A peak this prominent (dB) in two frames in a row is confirmed at once (a fast-growing tone). */
export const FAST_CONFIRM_DB = 15;
/**
 * A peak this prominent in a single frame is confirmed at once: noise reaches it with probability
 * e^−100 per bin (an exponentially distributed bin 20 dB over its mean), and broadband clicks have
 * no narrow peak.
 */
export const INSTANT_CONFIRM_DB = 20;
/** Frames a tentative peak may be missed before it is dropped. */
const TENTATIVE_MAX_MISSES = 1;

/** Mains frequencies, Hz. */
export const MAINS_HZ = [50, 60];

/**
 * True when freqHz lies on the 1st-4th multiple of the mains frequency mainsHz within
 * 0.1 + 0.05·n Hz (grid frequency within ±0.1 %, common practice). Only a label: whether a line
 * is steady is decided by its envelope (line-class.ts).
 */
export function isMainsMultiple(freqHz: number, mainsHz: number): boolean {
  const n = Math.round(freqHz / mainsHz);
  return n >= 1 && n <= 4 && Math.abs(freqHz - n * mainsHz) <= 0.1 + 0.05 * n;
}

/** A confirmed tone track: current frequency and its history (one row per frame it was seen). */
export interface ToneTrack {
  id: number;
  /** Identity of the tone this track follows: tracks of one tone across quiet gaps share it. */
  toneId: number;
  /** Frequency where a prominent peak last placed the tone, Hz. */
  heardHz: number;
  /** Frame where a prominent peak last placed the tone. */
  heardFrame: number;
  freqHz: number;
  /** Consecutive frames without a matching peak. */
  misses: number;
  lastHitFrame: number;
  createdFrame: number;
  /** Largest prominence seen, dB. */
  maxProminenceDb: number;
  histTimeS: Float64Array;
  histFreqHz: Float32Array;
  histCount: number;
}

export interface TrackerState {
  readonly binHz: number;
  readonly maxTentative: number;
  tentFreqHz: Float64Array;
  tentHits: Int32Array;
  tentMisses: Int32Array;
  tentProm: Float64Array;
  /** Prominence in the latest and the previous frame seen. */
  tentLastProm: Float64Array;
  tentPrevProm: Float64Array;
  tentCount: number;
  /** Per-peak flag: matched in this frame. */
  used: Uint8Array;
  /** Frequencies confirmed in the latest step (read count, then freq). */
  confirmedCount: number;
  confirmedFreqHz: Float64Array;
  confirmedProm: Float64Array;
  nextId: number;
}

/** Creates the tracker for spectra of bin width binHz (Hz) and peak lists of peakCapacity. */
export function createTrackerState(binHz: number, peakCapacity: number, maxTentative = 16): TrackerState {
  return {
    binHz,
    maxTentative,
    tentFreqHz: new Float64Array(maxTentative),
    tentHits: new Int32Array(maxTentative),
    tentMisses: new Int32Array(maxTentative),
    tentProm: new Float64Array(maxTentative),
    tentLastProm: new Float64Array(maxTentative),
    tentPrevProm: new Float64Array(maxTentative),
    tentCount: 0,
    used: new Uint8Array(peakCapacity),
    confirmedCount: 0,
    confirmedFreqHz: new Float64Array(maxTentative),
    confirmedProm: new Float64Array(maxTentative),
    nextId: 1,
  };
}

/** Creates a confirmed track at freqHz (allocates its history; done once per new tone). */
export function createToneTrack(st: TrackerState, freqHz: number, frame: number, prominenceDb: number): ToneTrack {
  return {
    id: st.nextId,
    toneId: st.nextId++,
    heardHz: freqHz,
    heardFrame: frame,
    freqHz,
    misses: 0,
    lastHitFrame: frame,
    createdFrame: frame,
    maxProminenceDb: prominenceDb,
    histTimeS: new Float64Array(256),
    histFreqHz: new Float32Array(256),
    histCount: 0,
  };
}

/**
 * A tone that returns after a quiet gap within this fraction of its last frequency continues the
 * same tone: a duct mode moves as √T of the gas, so a 10 % warmer gas moves it by about 5 %
 * (REFERENCES.md §1). Modes of one duct lie much further apart (end corrections aside, at
 * multiples of the fundamental).
 */
export const IDENTITY_FRACTION = 0.05;

/** Whether a line at freqHz continues a tone last heard at toneHz (quiet in between). */
export function isSameToneHz(binHz: number, toneHz: number, freqHz: number): boolean {
  return Math.abs(freqHz - toneHz) <= Math.max(2 * matchToleranceHz(binHz, toneHz), IDENTITY_FRACTION * toneHz);
}

/** Matching tolerance around a track at freqHz, Hz. */
export function matchToleranceHz(binHz: number, freqHz: number): number {
  return Math.max(1.5 * binHz, 0.02 * freqHz);
}

/** Highest harmonic number grouped under a tone (a limit cycle's waveform reaches k ≈ 20 in a 4 kHz band). */
export const MAX_HARMONIC = 20;

/**
 * Tolerance for a line at n·f0 to be the n-th harmonic of a tone tracked at f0, Hz: the harmonic's
 * own peak error (3/4 bin) plus n times the tracked fundamental's uncertainty (a quarter bin, or
 * 1 % while it drifts in a growth; common practice: errors of f0 scale with the harmonic number).
 */
export function harmonicToleranceHz(binHz: number, f0Hz: number, n: number): number {
  return 0.75 * binHz + n * Math.max(0.25 * binHz, 0.01 * f0Hz);
}

function appendHistory(t: ToneTrack, timeS: number, freqHz: number): void {
  if (t.histCount === t.histTimeS.length) {
    // Doubling growth: amortised, bounded by frames seen (~12 per second).
    const nt = new Float64Array(2 * t.histTimeS.length);
    nt.set(t.histTimeS);
    const nf = new Float32Array(2 * t.histFreqHz.length);
    nf.set(t.histFreqHz);
    t.histTimeS = nt;
    t.histFreqHz = nf;
  }
  t.histTimeS[t.histCount] = timeS;
  t.histFreqHz[t.histCount] = freqHz;
  t.histCount++;
}

/**
 * One frame of tracking: matches fundamental peaks to `tracks` (updating frequency, misses and
 * history), then advances the tentative tracks with the remaining peaks of prominence ≥
 * newMinProminenceDb. Frequencies that reached CONFIRM_HITS are left in st.confirmedFreqHz for
 * the caller to turn into tracks. Allocates nothing except when a history doubles.
 */
export function stepTracker(st: TrackerState, tracks: ToneTrack[], peaks: PeakList, frame: number, timeS: number, newMinProminenceDb: number): void {
  const used = st.used;
  for (let i = 0; i < peaks.count; i++) used[i] = peaks.harmonicOf[i] !== 0 ? 1 : 0;
  for (let t = 0; t < tracks.length; t++) {
    const tr = tracks[t];
    const tol = matchToleranceHz(st.binHz, tr.freqHz);
    let best = -1;
    let bestD = tol;
    for (let i = 0; i < peaks.count; i++) {
      if (used[i]) continue;
      const d = Math.abs(peaks.freqHz[i] - tr.freqHz);
      if (d <= bestD) {
        bestD = d;
        best = i;
      }
    }
    if (best < 0) {
      tr.misses++;
      continue;
    }
    used[best] = 1;
    tr.misses = 0;
    tr.lastHitFrame = frame;
    if (peaks.prominenceDb[best] > tr.maxProminenceDb) tr.maxProminenceDb = peaks.prominenceDb[best];
    tr.freqHz = peaks.freqHz[best];
    appendHistory(tr, timeS, tr.freqHz);
    // Where the tone was last heard: only a peak as prominent as one that starts a tone. Weaker
    // peaks near a quiet tone are mostly the band's noise; the identity of a tone that returns is
    // judged from here (docs/DESIGN.md, Tone identity).
    if (peaks.prominenceDb[best] >= newMinProminenceDb) {
      tr.heardHz = tr.freqHz;
      tr.heardFrame = frame;
    }
  }
  // Tentative tracks.
  for (let j = 0; j < st.tentCount; j++) st.tentMisses[j]++;
  for (let i = 0; i < peaks.count; i++) {
    if (used[i] || peaks.prominenceDb[i] < newMinProminenceDb) continue;
    const f = peaks.freqHz[i];
    const tol = matchToleranceHz(st.binHz, f);
    let best = -1;
    let bestD = tol;
    for (let j = 0; j < st.tentCount; j++) {
      const d = Math.abs(st.tentFreqHz[j] - f);
      if (d <= bestD) {
        bestD = d;
        best = j;
      }
    }
    if (best >= 0) {
      if (st.tentMisses[best] === 0) continue; // already matched this frame
      st.tentFreqHz[best] = f;
      st.tentHits[best]++;
      st.tentMisses[best] = 0;
      st.tentPrevProm[best] = st.tentLastProm[best];
      st.tentLastProm[best] = peaks.prominenceDb[i];
      if (peaks.prominenceDb[i] > st.tentProm[best]) st.tentProm[best] = peaks.prominenceDb[i];
    } else if (st.tentCount < st.maxTentative) {
      const j = st.tentCount++;
      st.tentFreqHz[j] = f;
      st.tentHits[j] = 1;
      st.tentMisses[j] = 0;
      st.tentProm[j] = peaks.prominenceDb[i];
      st.tentLastProm[j] = peaks.prominenceDb[i];
      st.tentPrevProm[j] = 0;
    }
  }
  // Confirm or drop.
  st.confirmedCount = 0;
  let w = 0;
  for (let j = 0; j < st.tentCount; j++) {
    if (st.tentHits[j] >= CONFIRM_HITS || (st.tentMisses[j] === 0 && st.tentLastProm[j] >= INSTANT_CONFIRM_DB) || (st.tentHits[j] >= 2 && st.tentMisses[j] === 0 && st.tentLastProm[j] >= FAST_CONFIRM_DB && st.tentPrevProm[j] >= FAST_CONFIRM_DB)) {
      st.confirmedFreqHz[st.confirmedCount] = st.tentFreqHz[j];
      st.confirmedProm[st.confirmedCount] = st.tentProm[j];
      st.confirmedCount++;
      continue;
    }
    if (st.tentMisses[j] > TENTATIVE_MAX_MISSES) continue;
    st.tentFreqHz[w] = st.tentFreqHz[j];
    st.tentHits[w] = st.tentHits[j];
    st.tentMisses[w] = st.tentMisses[j];
    st.tentProm[w] = st.tentProm[j];
    st.tentLastProm[w] = st.tentLastProm[j];
    st.tentPrevProm[w] = st.tentPrevProm[j];
    w++;
  }
  st.tentCount = w;
}

/** Forgets the tentative tracks (after a gap). */
export function resetTentative(st: TrackerState): void {
  st.tentCount = 0;
  st.confirmedCount = 0;
}

/** Median of the track's frequency history between t0 and t1 (s); the current frequency when none. */
export function medianFrequencyHz(t: ToneTrack, t0: number, t1: number): number {
  const vals: number[] = [];
  for (let i = 0; i < t.histCount; i++) {
    const ts = t.histTimeS[i];
    if (ts >= t0 && ts <= t1) vals.push(t.histFreqHz[i]);
  }
  if (vals.length === 0) return t.freqHz;
  vals.sort((a, b) => a - b);
  const m = vals.length;
  return m % 2 === 1 ? vals[(m - 1) / 2] : 0.5 * (vals[m / 2 - 1] + vals[m / 2]);
}
