/**
 * Tone identity (docs/DESIGN.md "Tone identity"): which tones are tracked, each with its envelope
 * store and regime. At every spectral frame the tracker's confirmed peaks start new tones (their
 * envelope rebuilt from the sample history), tracks on one tone merge, tones retune their
 * demodulator, and tones unseen and quiet for a while are retired (their segments stay for the
 * report). Between frames every tone's demodulator runs on the conditioned samples.
 */
import { resetEnvelope, setEnvelopeFrequency, stepEnvelope } from './envelope';
import { DUPLICATE_SKIRT_DB } from './grouping';
import { bandBackground, type History } from './history';
import { createPeakList, findPeaks, groupHarmonics, suppressLeakage, type PeakList } from './peak';
import { finishRegime, restartRegime, STATE_QUIET, stepRegime } from './regime';
import type { SpectrumState } from './spectrum';
import type { TimeBase } from './time-base';
import {
  appendEnvelope,
  createEnvelopeScratch,
  createToneEnvelope,
  createToneRuntime,
  type EnvelopeScratch,
  type ToneRuntime,
} from './tone-store';
import {
  CONFIRM_HITS,
  createToneTrack,
  createTrackerState,
  harmonicToleranceHz,
  isSameToneHz,
  matchToleranceHz,
  MAX_HARMONIC,
  resetTentative,
  stepTracker,
  type ToneTrack,
  type TrackerState,
} from './track';

/** The demodulator follows the tone only when it has moved this far, Hz (the ±5 Hz band loses < 0.1 dB at 1 Hz). */
const RETUNE_HZ = 1;
/** Prominence for a peak to be listed / to start a tentative track, dB. */
const PEAK_MIN_DB = 6;
const NEW_TRACK_MIN_DB = 10;
/** Prominence of a weaker peak at f/2 or f/3 that makes it the fundamental, dB. */
const SUBHARMONIC_MIN_DB = 10;
/** Tones demodulated at once. */
const MAX_TRACKS = 6;
/** A tone unseen in the spectrum and quiet this long is retired, s. */
const RETIRE_AFTER_S = 5;

export interface ToneSet {
  tracker: TrackerState;
  peaks: PeakList;
  alive: ToneRuntime[];
  retired: ToneRuntime[];
  /** The tracker's view of the alive tones (same order as alive). */
  aliveTones: ToneTrack[];
  scratch: EnvelopeScratch;
  analysisRateHz: number;
  envM: number;
}

export function createToneSet(spec: SpectrumState, analysisRateHz: number, envM: number): ToneSet {
  return {
    tracker: createTrackerState(spec.binHz, 32),
    peaks: createPeakList(32),
    alive: [],
    retired: [],
    aliveTones: [],
    scratch: createEnvelopeScratch(1024),
    analysisRateHz,
    envM,
  };
}

/** Band background for a store entry at time t, interpolated between frame centres. */
function backgroundAt(hist: History, frameCount: number, tr: ToneRuntime, t: number): number {
  const fr = hist.frameTimeS.length;
  const last = frameCount - 1;
  let f = Math.max(tr.frameCursor, tr.bgFrameFrom);
  while (f < last && hist.frameTimeS[(f + 1) % fr] <= t) f++;
  tr.frameCursor = f;
  const t0 = hist.frameTimeS[f % fr];
  const b0 = tr.bgFrame[f % fr];
  if (t <= t0 || f >= last) return b0;
  const t1 = hist.frameTimeS[(f + 1) % fr];
  const b1 = tr.bgFrame[(f + 1) % fr];
  const a = (t - t0) / (t1 - t0);
  return b0 + a * (b1 - b0);
}

/** Feeds a tone's regime with its envelope up to time tMax (s). */
export function advanceRegime(hist: History, frameCount: number, tr: ToneRuntime, tMax: number): void {
  if (frameCount <= tr.bgFrameFrom) return;
  const rg = tr.regime;
  while (tr.processed < tr.n && tr.timeS[tr.processed] <= tMax) {
    const k = tr.processed++;
    const b = backgroundAt(hist, frameCount, tr, tr.timeS[k]);
    tr.bg[k] = b;
    if (k < tr.validFrom) {
      tr.state[k] = STATE_QUIET;
      continue;
    }
    if (tr.clipped[k]) {
      // Clipped stretches tell nothing about the regime: hold the state.
      tr.state[k] = rg.state < 0 ? STATE_QUIET : rg.state;
      continue;
    }
    stepRegime(rg, k, tr.power[k], b);
    tr.state[k] = rg.state < 0 ? STATE_QUIET : rg.state;
    if (b > 0) {
      const ex = 10 * Math.log10(tr.power[k] / b);
      if (ex > tr.maxExcessDb) tr.maxExcessDb = ex;
    }
  }
}

/** Runs every alive tone's demodulator on conditioned samples x[from, to), the first at global analysis index j0. */
export function stepToneEnvelopes(ts: ToneSet, x: Float32Array, from: number, to: number, j0: number, tb: TimeBase, hist: History): void {
  const m = ts.envM;
  const sc = ts.scratch;
  for (const tr of ts.alive) {
    // Demodulators share the envelope clock: the next output closes the boxcar ending at a multiple of m.
    const g = (j0 + m - tr.env.phase) / m - 1;
    const produced = stepEnvelope(tr.env, x, from, to, sc.power, sc.wide, sc.phase, 0);
    appendEnvelope(tr, sc, produced, g, tb, hist.envClip);
  }
}

/** Most analysis samples one stepToneEnvelopes call may take (the scratch holds their outputs). */
export function maxEnvelopeChunk(ts: ToneSet): number {
  return ts.scratch.power.length * ts.envM - ts.envM;
}

/**
 * The tone a new line at freqHz continues: the retired track heard most recently whose last
 * frequency lies within the identity neighbourhood (isSameToneHz); null when none. A track still
 * alive is another line sounding beside it (a resonance in the quiet next to a hum), unless it was
 * handed over to this line and retired just before (stepTonesAtFrame): two alive tracks never
 * share a tone, so each stretch of the record is told by one of them.
 */
function identityOf(ts: ToneSet, binHz: number, freqHz: number): number | null {
  let best: ToneRuntime | null = null;
  for (const tr of ts.retired) {
    if (!isSameToneHz(binHz, tr.tone.heardHz, freqHz)) continue;
    if (best === null || tr.tone.lastHitFrame > best.tone.lastHitFrame) best = tr;
  }
  return best === null ? null : best.tone.toneId;
}

/** Starts a tone: rebuilds its envelope from the sample history and its background from the frame history. */
function startTone(ts: ToneSet, spec: SpectrumState, hist: History, tb: TimeBase, freqHz: number, promDb: number, frameIdx: number): void {
  const tone = createToneTrack(ts.tracker, freqHz, frameIdx, promDb);
  tone.toneId = identityOf(ts, spec.binHz, freqHz) ?? tone.toneId;
  const tr = createToneRuntime(tone, createToneEnvelope(ts.analysisRateHz, ts.envM), false, hist.frameTimeS.length);
  const m = ts.envM;
  const cap = hist.ring.length;
  let jStart = Math.max(hist.ringStartJ, tb.j - cap + 1);
  jStart = Math.ceil(jStart / m) * m;
  if (jStart > tb.j) jStart = tb.j;
  setEnvelopeFrequency(tr.env, freqHz);
  resetEnvelope(tr.env, jStart % m);
  let g = Math.floor(jStart / m);
  // Demodulate the history in at most two contiguous pieces of the ring.
  let j = jStart;
  const sc = ts.scratch;
  while (j < tb.j) {
    const at = j % cap;
    const len = Math.min(tb.j - j, cap - at, maxEnvelopeChunk(ts));
    const cnt = stepEnvelope(tr.env, hist.ring, at, at + len, sc.power, sc.wide, sc.phase, 0);
    appendEnvelope(tr, sc, cnt, g, tb, hist.envClip);
    g += cnt;
    j += len;
  }
  tr.validFrom = tr.env.settleSamples;
  // Background at the tone's frequency for the frames still held.
  const fr = hist.frameTimeS.length;
  const last = spec.frameCount - 1;
  const first = Math.max(hist.frameFloor, last - fr + 1, 0);
  for (let f = first; f <= last; f++) tr.bgFrame[f % fr] = bandBackground(hist, spec, hist.frameRing[f % fr], freqHz);
  tr.bgFrameFrom = first;
  tr.frameCursor = first;
  ts.alive.push(tr);
  ts.aliveTones.push(tr.tone);
}

/** Retires alive tone idx: its regime is run to the end of its store and closed. */
export function retireTone(ts: ToneSet, hist: History, frameCount: number, idx: number): void {
  const tr = ts.alive[idx];
  advanceRegime(hist, frameCount, tr, Infinity);
  finishRegime(tr.regime, tr.n);
  tr.isAlive = false;
  ts.alive.splice(idx, 1);
  ts.aliveTones.splice(idx, 1);
  // Keep only tones that ever left the quiet state (their segments go into the report).
  if (tr.regime.segments.some((s) => s.state !== STATE_QUIET)) ts.retired.push(tr);
}

/**
 * Two tracks on one tone (a second track can start while the first is still moving, e.g. during a
 * fast growth whose frequency drifts) are merged: the older keeps its envelope history and takes
 * the latest frequency; the younger is retired. When the younger saw the tone clearly stronger
 * (DUPLICATE_SKIRT_DB, grouping.ts) the older held it through the skirt of its band (left on a
 * nearby resonance while the tone moved further than the match tolerance) and is the one retired:
 * the younger's envelope was rebuilt from the history. A retired track keeps its segments: its
 * history may hold a cycle that the other's does not reach back to (a track that wandered onto
 * the line of one started at the next cycle), and the grouping tells each stretch once (grouping.ts).
 */
function mergeDuplicateTones(ts: ToneSet, hist: History, spec: SpectrumState): void {
  const binHz = spec.binHz;
  for (let a = ts.alive.length - 1; a >= 1; a--) {
    const ta = ts.alive[a];
    for (let b = 0; b < a; b++) {
      const tb = ts.alive[b];
      if (Math.abs(ta.tone.freqHz - tb.tone.freqHz) > matchToleranceHz(binHz, tb.tone.freqHz)) continue;
      const isYoungerCentred = ta.maxExcessDb > tb.maxExcessDb + DUPLICATE_SKIRT_DB;
      const keep = isYoungerCentred ? ta : tb;
      const drop = isYoungerCentred ? tb : ta;
      const at = isYoungerCentred ? b : a;
      if (drop.tone.lastHitFrame > keep.tone.lastHitFrame) {
        keep.tone.freqHz = drop.tone.freqHz;
        keep.tone.lastHitFrame = drop.tone.lastHitFrame;
        keep.tone.misses = 0;
      }
      if (drop.maxExcessDb > keep.maxExcessDb) keep.maxExcessDb = drop.maxExcessDb;
      retireTone(ts, hist, spec.frameCount, at);
      break;
    }
  }
}

/**
 * Counts, for each tone sounding in this frame, the peaks on its harmonics k·f (k ≥ 2, within the
 * tracker's harmonic tolerance), before the peak grouping folds them into the fundamental: the
 * report lists the orders seen in most of the frames the tone sounded (report.ts harmonicsOf).
 */
function noteHarmonics(ts: ToneSet, binHz: number): void {
  const peaks = ts.peaks;
  for (const tr of ts.alive) {
    if (tr.regime.state <= STATE_QUIET) continue;
    tr.soundingFrames++;
    const f0 = tr.tone.freqHz;
    for (let i = 0; i < peaks.count; i++) {
      if (peaks.harmonicOf[i] !== 0) continue;
      const k = Math.round(peaks.freqHz[i] / f0);
      if (k < 2 || k > MAX_HARMONIC || Math.abs(peaks.freqHz[i] - k * f0) > harmonicToleranceHz(binHz, f0, k)) continue;
      tr.harmonicHits[k]++;
      tr.harmonicHz[k] = peaks.freqHz[i];
    }
  }
}

/**
 * Tone identity at one spectral frame (frame frameIdx, centred at tF s): peaks, tracking, merging,
 * retuning and band background of the alive tones, and new tones from confirmed peaks (none from
 * a frame whose samples clipped).
 */
export function stepTonesAtFrame(ts: ToneSet, spec: SpectrumState, hist: History, tb: TimeBase, frameIdx: number, tF: number, isFrameClipped: boolean): void {
  findPeaks(spec, hist.loBin, hist.hiBin, PEAK_MIN_DB, ts.peaks);
  suppressLeakage(spec, ts.peaks);
  noteHarmonics(ts, spec.binHz);
  groupHarmonics(spec, ts.peaks, hist.loBin, hist.hiBin, SUBHARMONIC_MIN_DB);
  stepTracker(ts.tracker, ts.aliveTones, ts.peaks, frameIdx, tF, NEW_TRACK_MIN_DB);
  mergeDuplicateTones(ts, hist, spec);
  const fr = hist.frameTimeS.length;
  for (const tr of ts.alive) {
    // Retune only when the tone has moved well inside the band: a fixed demodulation frequency
    // keeps arg z a straight line whose slope gives the frequency precisely (segment-fit.ts).
    if (Math.abs(tr.tone.freqHz - tr.env.freqHz) > RETUNE_HZ) setEnvelopeFrequency(tr.env, tr.tone.freqHz);
    tr.bgFrame[frameIdx % fr] = bandBackground(hist, spec, spec.power, tr.tone.freqHz);
  }
  const tk = ts.tracker;
  // Clipping spreads harmonics over the spectrum: no new tones from clipped frames (and the
  // tentative peaks seen in them are forgotten).
  if (isFrameClipped) resetTentative(tk);
  for (let c = 0; c < tk.confirmedCount && !isFrameClipped; c++) {
    const f = tk.confirmedFreqHz[c];
    let dup = false;
    let handover = -1;
    for (let i = 0; i < ts.alive.length; i++) {
      const tr = ts.alive[i];
      // Same tone, or a harmonic of a tone sounding now (a limit cycle's waveform, distortion).
      const n = Math.round(f / tr.tone.freqHz);
      // A peak that no track matched within its tolerance is a tone of its own (a track left on
      // a nearby resonance would read it through the skirt of its band); of two tracks that then
      // hold one tone, the one seeing it through the centre of its band is kept.
      if (n === 1 && Math.abs(f - tr.tone.freqHz) <= matchToleranceHz(spec.binHz, tr.tone.freqHz)) dup = true;
      const isSounding = tr.regime.state > STATE_QUIET || tr.isSteadyLine;
      // A quiet tone whose hum returns a little off its last frequency (the gas warmed): the
      // new track rebuilt at the new frequency continues it (docs/DESIGN.md, Tone identity).
      // Only for a tone that has sounded (a history to continue), and a line outside its narrow
      // band (its demodulator would hear it attenuated); otherwise the tone's own track follows.
      const hasSounded = tr.regime.segments.some((q) => q.state !== STATE_QUIET);
      // A tone heard as prominently as a new one while that was being confirmed sounds beside it.
      const isHeardNow = frameIdx - tr.tone.heardFrame < CONFIRM_HITS;
      if (!isSounding && !isHeardNow && hasSounded && isSameToneHz(spec.binHz, tr.tone.heardHz, f) && Math.abs(f - tr.env.freqHz) > tr.env.bandwidthHz) handover = i;
      if (n >= 2 && n <= MAX_HARMONIC && isSounding && Math.abs(f - n * tr.tone.freqHz) <= harmonicToleranceHz(spec.binHz, tr.tone.freqHz, n)) dup = true;
    }
    if (handover >= 0 && (!dup || Math.abs(f - ts.alive[handover].tone.freqHz) > matchToleranceHz(spec.binHz, f))) {
      retireTone(ts, hist, spec.frameCount, handover);
      dup = false;
    }
    if (dup) continue;
    if (ts.alive.length >= MAX_TRACKS) {
      // Make room: the quiet tone unseen longest.
      let victim = -1;
      for (let i = 0; i < ts.alive.length; i++) {
        const tr = ts.alive[i];
        if (tr.regime.state > STATE_QUIET || frameIdx - tr.tone.heardFrame < CONFIRM_HITS) continue;
        if (victim < 0 || tr.tone.lastHitFrame < ts.alive[victim].tone.lastHitFrame) victim = i;
      }
      if (victim < 0) continue;
      retireTone(ts, hist, spec.frameCount, victim);
    }
    startTone(ts, spec, hist, tb, f, tk.confirmedProm[c], frameIdx);
  }
}

/** Retires the tones unseen in the spectrum and quiet for RETIRE_AFTER_S. */
export function retireIdleTones(ts: ToneSet, spec: SpectrumState, hist: History, frameIdx: number): void {
  const retireFrames = Math.round((RETIRE_AFTER_S * ts.analysisRateHz) / spec.hopSize);
  for (let i = ts.alive.length - 1; i >= 0; i--) {
    const tr = ts.alive[i];
    if (frameIdx - tr.tone.lastHitFrame < retireFrames) continue;
    const rg = tr.regime;
    if (rg.state > STATE_QUIET) continue;
    if (rg.state === STATE_QUIET && tr.processed - rg.quietStartIdx < RETIRE_AFTER_S * tr.env.outputRateHz) continue;
    retireTone(ts, hist, spec.frameCount, i);
  }
}

/** Settles every alive tone before a gap and restarts its regime and demodulator after it. */
export function breakTones(ts: ToneSet, hist: History, frameCount: number): void {
  for (const tr of ts.alive) {
    advanceRegime(hist, frameCount, tr, Infinity);
    restartRegime(tr.regime, tr.n);
    tr.validFrom = tr.n + tr.env.settleSamples;
    resetEnvelope(tr.env, 0);
  }
  resetTentative(ts.tracker);
}

/** After a gap the band background starts again at frame frameCount. */
export function resumeTonesAfterGap(ts: ToneSet, frameCount: number): void {
  for (const tr of ts.alive) {
    tr.bgFrameFrom = frameCount;
    tr.frameCursor = frameCount;
  }
}
