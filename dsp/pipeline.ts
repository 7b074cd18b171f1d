/**
 * The streaming analysis (DESIGN.md stages 1-7): one object for the live microphone and for
 * files. push(block) conditions the samples, frames the spectrum, tracks tones, demodulates
 * each tracked tone's envelope and follows its regime; finish() fits the segments and writes the
 * report. Every stage runs sample by sample on its own state and frame work happens at fixed
 * sample counts, so results do not depend on how the input is cut into blocks.
 *
 * Time alignment: the decimation filters (linear phase) and the envelope low-pass (group delay at
 * DC) delay their outputs; sample times are corrected for both. The regime of a tone reads its
 * envelope only up to the centre of the latest spectral frame, so the band background (from that
 * frame) and the envelope describe the same moment.
 */
import {
  CONDITION_MAX_BLOCK,
  createConditionState,
  gapCondition,
  stepCondition,
  type ConditionState,
} from './condition';
import { estimateNoiseDrivenDamping } from './damping';
import { deriveSummary } from './derived';
import { findKink, MARKER_SEARCH_S } from './kink';
import {
  bandPowerFromBinPower,
  createEnvelopeState,
  resetEnvelope,
  setEnvelopeFrequency,
  stepEnvelope,
  type EnvelopeState,
} from './envelope';
import { backgroundCrossingTimeS, fitExponential, fitGrowthIntoLimit, studentTQuantile } from './fit';
import { createPeakList, findPeaks, groupHarmonics, neighbourNoisePower, suppressLeakage, type PeakList } from './peak';
import {
  beginRegimeStep,
  createRegimeState,
  finishRegime,
  ON_DB,
  regimeKind,
  restartRegime,
  stepRegime,
  STATE_DECAY,
  STATE_GROWTH,
  STATE_QUIET,
  STATE_STEADY,
  type RegimeSegment,
  type RegimeState,
} from './regime';
import {
  computeSpectrumFrame,
  createSpectrumState,
  feedSpectrum,
  localFloorMean,
  resetSpectrumFraming,
  type SpectrumState,
} from './spectrum';
import {
  createToneTrack,
  createTrackerState,
  isMainsLine,
  matchToleranceHz,
  medianFrequencyHz,
  resetTentative,
  stepTracker,
  type ToneTrack,
  type TrackerState,
} from './track';
import {
  REPORT_VERSION,
  type Analysis,
  type AnalysisConfig,
  type AnalysisUpdate,
  type ClippedSpan,
  type EnvelopeSeries,
  type Interval,
  type Marker,
  type NoiseDriven,
  type Onset,
  type RateFit,
  type RegimeKind,
  type Report,
  type Segment,
  type TrackFrame,
} from './types';

/** Analysis frame length, s (rounded to a power of two of samples): ~3 Hz bins. */
const FRAME_S = 0.32;
/** Envelope samples per second (about). */
const ENVELOPE_RATE_HZ = 300;
/** Envelope low-pass noise bandwidth: the narrow band is about ±5 Hz around the tone. */
const ENVELOPE_BANDWIDTH_HZ = 5;
/**
 * Wider envelope band for the fits, Hz: a ±5 Hz band blurs the envelope over ~20 ms, enough to
 * bend the knee of a fast rise into saturation; ±20 Hz blurs 4× less. Used when no other tone
 * lies within WIDE_CLEARANCE_HZ (the wide kernel's main lobe).
 */
const ENVELOPE_WIDE_BANDWIDTH_HZ = 20;
const WIDE_CLEARANCE_HZ = 100;
/** The demodulator follows the tone only when it has moved this far, Hz (the band loses < 0.1 dB at 1 Hz). */
const RETUNE_HZ = 1;
/** Look-ahead onset test: the regime's thresholds (regime.ts ON_DB, LOW_DB). */
const ON_DB_LOOKAHEAD = 12;
const LOW_DB_LOOKAHEAD = 3;
/** Track rows per second (about). */
const ROW_RATE_HZ = 100;
/** History kept for tones detected late (their envelope is rebuilt from here), s. */
const HISTORY_S = 10;
/** Prominence for a peak to be listed / to start a tentative track, dB. */
const PEAK_MIN_DB = 6;
const NEW_TRACK_MIN_DB = 10;
/** Prominence of a weaker peak at f/2 or f/3 that makes it the fundamental, dB. */
const SUBHARMONIC_MIN_DB = 10;
/** Background bins beside a tone: inner..outer bins away. */
const BG_INNER_BINS = 6;
const BG_OUTER_BINS = 30;
/** Highest harmonic number grouped under a tone (a limit cycle's waveform reaches k ≈ 20 in a 4 kHz band). */
const MAX_HARMONIC = 20;
/** Tracks demodulated at once. */
const MAX_TRACKS = 6;
/** A track unseen in the spectrum and quiet this long is retired, s. */
const RETIRE_AFTER_S = 5;
/** Quiet-stretch store for noise-driven damping: cap and minimum useful length, s. */
const QUIET_STORE_S = 120;
const QUIET_MIN_S = 10;
/** Margin kept out of a quiet stretch after a decay, s (the tail at 5 1/s is 43 dB down after 1 s). */
const QUIET_AFTER_DECAY_S = 1.5;
/** Margin kept out of a quiet stretch before a growth, s. */
const QUIET_GUARD_S = 0.5;
/** Prominence of a resonance in the long-averaged quiet spectrum, dB. */
const RESONANCE_MIN_DB = 3;
/** Envelope samples this close to clipping are kept out of the fits, s. */
const CLIP_GUARD_S = 0.25;
/** Background taken from this much quiet next to a segment, s. */
const BG_WINDOW_S = 2;
const BG_MIN_S = 0.3;
/** Pre-roll of background included before a growth segment in its fit, s. */
const GROWTH_PREROLL_S = 1.5;
/** Two-sided 95 % quantile of the standard normal (a 95 % half-width is Z95 sd). */
const Z95 = 1.959963984540054;
/** Tail of quiet after a decay included in its fit, s. */
const DECAY_TAIL_S = 1.0;
/** Window either side of a growth or decay in which its noise level is judged, s, and how far above the spectral background that level may lie, dB. */
const NOISE_PAD_S = 1;
const NOISE_SPAN_DB = 20;
/** Mean square second difference of ln A² above which an envelope is noise (as regime.ts NOISE_D2). */
const NOISE_D2 = 2.5;
/** A weaker line within this fraction of a tone's frequency and this many dB below it is its sidelobe or intermodulation product. */
const NEAR_LINE_FRACTION = 0.35;
const NEAR_LINE_DB = 20;
/** Rise (dB) and least duration (envelope kernels) of a growth that makes a mains-frequency track a tone. */
const MAINS_TONE_RISE_DB = 40;
const MAINS_TONE_MIN_RISE_KERNELS = 2;
/** Active starts of two tracks of one tone closer than this are taken as simultaneous, s. */
const DUPLICATE_START_S = 0.05;
/**
 * Peak-power ratio (dB, and as a ratio) beyond which of two tracks of one tone the weaker holds it through the
 * skirt of its band: the narrow envelope band (Blackman, noise bandwidth ENVELOPE_BANDWIDTH_HZ)
 * loses about 0.1 dB at RETUNE_HZ off centre and 1 dB near 2.7 Hz off (dsp/envelope.ts).
 */
const DUPLICATE_SKIRT_DB = 1;
const DUPLICATE_SKIRT_RATIO = 10 ** (DUPLICATE_SKIRT_DB / 10);
/** Margin on the parent tone's active span for a line that rises and falls with it, s. */
const WITHIN_MARGIN_S = 1;
/** Most envelope samples handed to one fit (longer steady stretches are block-averaged). */
const MAX_FIT_SAMPLES = 6000;

/** One tracked tone with its envelope store and regime. */
interface TrackRuntime {
  tone: ToneTrack;
  env: EnvelopeState;
  regime: RegimeState;
  isSteadyLine: boolean;
  /** Global envelope index of store entry 0. */
  g0: number;
  n: number;
  power: Float32Array;
  /** Same envelope through the wide band (for fits). */
  powerWide: Float32Array;
  /** arg z of the narrow band, rad, and the demodulation frequency it refers to, Hz. */
  phase: Float32Array;
  demodHz: Float32Array;
  timeS: Float64Array;
  bg: Float32Array;
  state: Uint8Array;
  clipped: Uint8Array;
  /** Store entries already given to the regime. */
  processed: number;
  /** First store entry with a settled filter. */
  validFrom: number;
  /** Band background per frame (ring indexed by frame index), and the first frame computed. */
  bgFrame: Float64Array;
  bgFrameFrom: number;
  frameCursor: number;
  isAlive: boolean;
  maxExcessDb: number;
  /** Envelope outputs still holding a clipped input in their kernel. */
  clipCountdown: number;
  /** Store index of an onset announced early by the look-ahead (−1: none pending). */
  earlyOnsetIdx: number;
  /** Peak envelope power once the record is finished (−1 until computed). */
  topPower: number;
}

/** Mutable per-run state of the composition. */
interface PipelineState {
  cfg: Required<AnalysisConfig>;
  cond: ConditionState;
  fsA: number;
  spec: SpectrumState;
  loBin: number;
  hiBin: number;
  peaks: PeakList;
  tracker: TrackerState;
  bgScratch: Float64Array;
  envM: number;
  envRateHz: number;
  envBandwidthHz: number;
  envDelayS: number;
  envScratch: Float64Array;
  envWideScratch: Float64Array;
  envPhaseScratch: Float64Array;
  rowEvery: number;
  /** Analysis samples produced (global index of the next one). */
  j: number;
  /** Time base: analysis index jBase corresponds to input index inBase (gaps included). */
  jBase: number;
  inBase: number;
  /** Ring of conditioned samples (HISTORY_S) and the oldest valid global index. */
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
  alive: TrackRuntime[];
  retired: TrackRuntime[];
  aliveTones: ToneTrack[];
  /** Next global envelope index for a track row, and whether a gap precedes it. */
  rowG: number;
  rowAfterGap: boolean;
  durationInputSamples: number;
  markers: Marker[];
  warnings: string[];
  /** Quiet-stretch store (ring) for noise-driven damping. */
  quietRing: Float32Array;
  quietStartJ: number;
  quietOpen: boolean;
  noiseDriven: NoiseDriven[];
  /** Live outputs of the current push. */
  frames: TrackFrame[];
  liveOnsets: Onset[];
  liveSegments: Segment[];
  spectrumDbfs: Float32Array;
  hasSpectrum: boolean;
  sawFrame: boolean;
  isFinished: boolean;
}

/** Time (s) of analysis sample j (fractional allowed), corrected for the decimation delay. */
function timeOfJ(ps: PipelineState, j: number): number {
  const d = ps.cond.decimation;
  return (ps.inBase + (j - ps.jBase + 1) * d - 1) / ps.cfg.sampleRateHz - ps.cond.delayS;
}

/** Time (s) of global envelope sample g, corrected for the decimation and envelope delays. */
function timeOfG(ps: PipelineState, g: number): number {
  return timeOfJ(ps, g * ps.envM + ps.envM - 1) - ps.envDelayS;
}

function growTrackStore(tr: TrackRuntime, need: number): void {
  if (need <= tr.power.length) return;
  let cap = tr.power.length;
  while (cap < need) cap *= 2;
  const p = new Float32Array(cap);
  p.set(tr.power.subarray(0, tr.n));
  const pw = new Float32Array(cap);
  pw.set(tr.powerWide.subarray(0, tr.n));
  tr.powerWide = pw;
  const ph = new Float32Array(cap);
  ph.set(tr.phase.subarray(0, tr.n));
  tr.phase = ph;
  const dh = new Float32Array(cap);
  dh.set(tr.demodHz.subarray(0, tr.n));
  tr.demodHz = dh;
  const t = new Float64Array(cap);
  t.set(tr.timeS.subarray(0, tr.n));
  const b = new Float32Array(cap);
  b.set(tr.bg.subarray(0, tr.n));
  const s = new Uint8Array(cap);
  s.set(tr.state.subarray(0, tr.n));
  const c = new Uint8Array(cap);
  c.set(tr.clipped.subarray(0, tr.n));
  tr.power = p;
  tr.timeS = t;
  tr.bg = b;
  tr.state = s;
  tr.clipped = c;
}

/** Appends `count` envelope outputs (in ps.envScratch) to a track; gFirst is the global index of the first. */
function appendEnvelope(ps: PipelineState, tr: TrackRuntime, count: number, gFirst: number): void {
  if (count === 0) return;
  if (tr.n === 0) tr.g0 = gFirst;
  growTrackStore(tr, tr.n + count);
  const ringLen = ps.envMs.length;
  for (let q = 0; q < count; q++) {
    const g = gFirst + q;
    const k = tr.n++;
    tr.power[k] = ps.envScratch[q];
    tr.powerWide[k] = ps.envWideScratch[q];
    tr.phase[k] = ps.envPhaseScratch[q];
    tr.demodHz[k] = tr.env.freqHz;
    tr.timeS[k] = timeOfG(ps, g);
    // An output is affected by clipping while a clipped boxcar lies inside its kernel.
    if (ps.envClip[g % ringLen]) tr.clipCountdown = tr.env.kernelLength;
    tr.clipped[k] = tr.clipCountdown > 0 ? 1 : 0;
    if (tr.clipCountdown > 0) tr.clipCountdown--;
    tr.state[k] = STATE_QUIET;
  }
}

function frameBin(ps: PipelineState, freqHz: number): number {
  return Math.min(ps.hiBin - 1, Math.max(ps.loBin + 1, Math.round(freqHz / ps.spec.binHz)));
}

/** Band background (envelope power units) at a track's frequency from one frame's power spectrum. */
function bandBackground(ps: PipelineState, power: Float32Array | Float64Array, freqHz: number): number {
  const k = frameBin(ps, freqHz);
  const perBin = neighbourNoisePower(power as Float64Array, k, BG_INNER_BINS, BG_OUTER_BINS, ps.loBin, ps.hiBin, ps.bgScratch);
  return bandPowerFromBinPower(perBin, ps.envBandwidthHz, ps.spec.binHz);
}

function createTrackRuntime(ps: PipelineState, freqHz: number, promDb: number, frameIdx: number): TrackRuntime {
  const tone = createToneTrack(ps.tracker, freqHz, frameIdx, promDb);
  const env = createEnvelopeState({ sampleRateHz: ps.fsA, decimation: ps.envM, bandwidthHz: ENVELOPE_BANDWIDTH_HZ, wideBandwidthHz: ENVELOPE_WIDE_BANDWIDTH_HZ });
  const isSteadyLine = isMainsLine(freqHz);
  const cap = 4096;
  return {
    tone,
    env,
    regime: createRegimeState(env.outputRateHz, !isSteadyLine),
    isSteadyLine,
    g0: 0,
    n: 0,
    power: new Float32Array(cap),
    powerWide: new Float32Array(cap),
    phase: new Float32Array(cap),
    demodHz: new Float32Array(cap),
    timeS: new Float64Array(cap),
    bg: new Float32Array(cap),
    state: new Uint8Array(cap),
    clipped: new Uint8Array(cap),
    processed: 0,
    validFrom: 0,
    bgFrame: new Float64Array(ps.frameTimeS.length),
    bgFrameFrom: 0,
    frameCursor: 0,
    isAlive: true,
    maxExcessDb: -Infinity,
    clipCountdown: 0,
    earlyOnsetIdx: -1,
    topPower: -1,
  };
}

/** Starts a track: rebuilds its envelope from the sample history and its background from the frame history. */
function startTrack(ps: PipelineState, freqHz: number, promDb: number, frameIdx: number): void {
  const tr = createTrackRuntime(ps, freqHz, promDb, frameIdx);
  const m = ps.envM;
  const cap = ps.ring.length;
  let jStart = Math.max(ps.ringStartJ, ps.j - cap + 1);
  jStart = Math.ceil(jStart / m) * m;
  if (jStart > ps.j) jStart = ps.j;
  setEnvelopeFrequency(tr.env, freqHz);
  resetEnvelope(tr.env, jStart % m);
  let g = Math.floor(jStart / m);
  // Demodulate the history in at most two contiguous pieces of the ring.
  let j = jStart;
  while (j < ps.j) {
    const at = j % cap;
    const len = Math.min(ps.j - j, cap - at, ps.envScratch.length * m - m);
    const cnt = stepEnvelope(tr.env, ps.ring, at, at + len, ps.envScratch, ps.envWideScratch, ps.envPhaseScratch, 0);
    appendEnvelope(ps, tr, cnt, g);
    g += cnt;
    j += len;
  }
  tr.validFrom = tr.env.settleSamples;
  // Background at the track's frequency for the frames still held.
  const fr = ps.frameTimeS.length;
  const last = ps.spec.frameCount - 1;
  const first = Math.max(ps.frameFloor, last - fr + 1, 0);
  for (let f = first; f <= last; f++) tr.bgFrame[f % fr] = bandBackground(ps, ps.frameRing[f % fr], freqHz);
  tr.bgFrameFrom = first;
  tr.frameCursor = first;
  ps.alive.push(tr);
  ps.aliveTones.push(tr.tone);
}

function retireTrack(ps: PipelineState, idx: number): void {
  const tr = ps.alive[idx];
  advanceRegime(ps, tr, Infinity);
  finishRegime(tr.regime, tr.n);
  tr.isAlive = false;
  ps.alive.splice(idx, 1);
  ps.aliveTones.splice(idx, 1);
  // Keep only tracks that ever left the quiet state (their segments go into the report).
  if (tr.regime.segments.some((s) => s.state !== STATE_QUIET)) ps.retired.push(tr);
}

/** Band background for a store entry at time t, interpolated between frame centres. */
function backgroundAt(ps: PipelineState, tr: TrackRuntime, t: number): number {
  const fr = ps.frameTimeS.length;
  const last = ps.spec.frameCount - 1;
  let f = Math.max(tr.frameCursor, tr.bgFrameFrom);
  while (f < last && ps.frameTimeS[(f + 1) % fr] <= t) f++;
  tr.frameCursor = f;
  const t0 = ps.frameTimeS[f % fr];
  const b0 = tr.bgFrame[f % fr];
  if (t <= t0 || f >= last) return b0;
  const t1 = ps.frameTimeS[(f + 1) % fr];
  const b1 = tr.bgFrame[(f + 1) % fr];
  const a = (t - t0) / (t1 - t0);
  return b0 + a * (b1 - b0);
}

/** Feeds the regime with the track's envelope up to time tMax (s). */
function advanceRegime(ps: PipelineState, tr: TrackRuntime, tMax: number): void {
  if (ps.spec.frameCount <= tr.bgFrameFrom) return;
  const rg = tr.regime;
  while (tr.processed < tr.n && tr.timeS[tr.processed] <= tMax) {
    const k = tr.processed++;
    const b = backgroundAt(ps, tr, tr.timeS[k]);
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

/**
 * Frequency of a tone over a segment from the phase of its demodulated envelope: while the
 * demodulation frequency f_d is fixed, arg z(t) = 2π (f − f_d) t + const, so a straight line
 * through the unwrapped phase (weighted by |z|², over samples ≥ 6 dB over the band background and
 * within 20 dB of the segment's peak, restarting at every exclusion or retune) gives f. This approaches the accuracy of a fit to the
 * whole waveform (Rife & Boorstyn 1974) where a spectral peak is limited by its frame. A growth
 * that ends in a knee (it reached steady) leaves out its last half kernel, whose samples mix the
 * rise with the level after the knee. Falls back to the median of the spectral track.
 */
function segmentFrequency(tr: TrackRuntime, s: RegimeSegment): number {
  let sumW = 0;
  let sumWF = 0;
  // Normal equations of the current piece.
  let n = 0;
  let sw = 0;
  let st = 0;
  let sy = 0;
  let stt = 0;
  let sty = 0;
  let unwrapped = 0;
  let prev = 0;
  let demod = 0;
  const close = (): void => {
    if (n >= 8) {
      const sxx = stt - (st * st) / sw;
      if (sxx > 0) {
        const slope = (sty - (st * sy) / sw) / sxx;
        sumW += sxx;
        sumWF += sxx * (demod + slope / (2 * Math.PI));
      }
    }
    n = 0;
    sw = 0;
    st = 0;
    sy = 0;
    stt = 0;
    sty = 0;
  };
  // Only where the segment's tone dominates: within 20 dB of its strongest sample (early in a
  // growth the band may hold other sound, e.g. a noise-driven resonance, with its own phase).
  let maxP = 0;
  for (let k = Math.max(s.startIdx, tr.validFrom); k < s.endIdx; k++) if (!tr.clipped[k] && tr.power[k] > maxP) maxP = tr.power[k];
  const kEnd = s.state === STATE_GROWTH && s.reachedSteady ? Math.max(s.startIdx + 1, s.endIdx - Math.ceil(tr.env.kernelLength / 2)) : s.endIdx;
  for (let k = Math.max(s.startIdx, tr.validFrom); k < kEnd; k++) {
    const w = tr.power[k];
    const usable = !tr.clipped[k] && w > 4 * tr.bg[k] && w >= 0.01 * maxP;
    if (!usable || (n > 0 && tr.demodHz[k] !== demod)) close();
    if (!usable) continue;
    const th = tr.phase[k];
    if (n === 0) {
      unwrapped = th;
      demod = tr.demodHz[k];
    } else {
      let d = th - prev;
      if (d > Math.PI) d -= 2 * Math.PI;
      else if (d < -Math.PI) d += 2 * Math.PI;
      unwrapped += d;
    }
    prev = th;
    // Times relative to the segment start keep the sums well conditioned.
    const t = tr.timeS[k] - tr.timeS[s.startIdx];
    n++;
    sw += w;
    st += w * t;
    sy += w * unwrapped;
    stt += w * t * t;
    sty += w * t * unwrapped;
  }
  close();
  if (sumW > 0) return sumWF / sumW;
  const t0 = tr.timeS[s.startIdx];
  const t1 = tr.timeS[Math.max(s.startIdx, s.endIdx - 1)];
  return medianFrequencyHz(tr.tone, t0 - 0.2, t1 + 0.2);
}

/** A segment's times and frequency, with no rate yet. */
function unfittedSegment(tr: TrackRuntime, s: RegimeSegment, kind: RegimeKind): Segment {
  return {
    kind,
    startS: tr.timeS[s.startIdx],
    endS: tr.timeS[Math.max(s.startIdx, s.endIdx - 1)],
    frequencyHz: segmentFrequency(tr, s),
    ratePerS: null,
    rateCi95PerS: null,
    model: null,
  };
}

/**
 * Fallback provisional rate of a closed growth or decay segment for the live view (model 'log-linear'),
 * a straight line through ½ ln(A² − N²) over the part of the segment that stands 10 dB clear of
 * both the background and the segment's top, where neither the floor nor saturation bends it
 * (common practice); interval from the line's residuals with the effective sample count
 * 2·B·duration (as in dsp/fit.ts). finish() replaces it with the full fit.
 */
function quickSegment(tr: TrackRuntime, s: RegimeSegment): Segment {
  const seg = unfittedSegment(tr, s, regimeKind(s.state));
  const i0 = s.state === STATE_DECAY ? Math.min(s.endIdx, s.startIdx + tr.env.kernelLength) : s.startIdx;
  let top = 0;
  for (let k = i0; k < s.endIdx; k++) if (tr.power[k] > top) top = tr.power[k];
  let n = 0;
  let st = 0;
  let sy = 0;
  let stt = 0;
  let sty = 0;
  let syy = 0;
  let tFirst = Infinity;
  let tLast = -Infinity;
  for (let k = i0; k < s.endIdx; k++) {
    const p = tr.power[k] - tr.bg[k];
    if (tr.clipped[k] || !(p > 10 * tr.bg[k]) || !(tr.power[k] < 0.1 * top)) continue;
    const t = tr.timeS[k] - seg.startS;
    const y = 0.5 * Math.log(p);
    n++;
    st += t;
    sy += y;
    stt += t * t;
    sty += t * y;
    syy += y * y;
    if (t < tFirst) tFirst = t;
    if (t > tLast) tLast = t;
  }
  if (n < 8) return seg;
  const sxx = stt - (st * st) / n;
  const sxy = sty - (st * sy) / n;
  if (!(sxx > 0)) return seg;
  const slope = sxy / sxx;
  const rss = Math.max(0, syy - (sy * sy) / n - slope * sxy);
  const nEff = Math.min(n, 2 * tr.env.bandwidthHz * (tLast - tFirst));
  if (nEff < 3) return seg;
  const sd = Math.sqrt((rss / (n - 2) / sxx) * (n / nEff));
  const q = studentTQuantile(0.975, nEff - 2);
  seg.ratePerS = slope;
  seg.rateCi95PerS = [slope - q * sd, slope + q * sd];
  seg.model = 'log-linear';
  return seg;
}

/**
 * Provisional rate of a closed growth or decay segment for the live view: the exponential fit of
 * dsp/fit.ts on the part of the segment that the fit's model describes (a growth from half a
 * second of background before it up to 20 dB under its top, where a Landau curve departs from the
 * exponential by under 1 %; a decay from one kernel after its start, the filter's transient, to
 * the envelope seen so far, background fitted). Falls back to quickSegment's straight line when
 * the fit fails or gives the wrong sign. finish() fits every segment again with the full models.
 */
function liveSegment(tr: TrackRuntime, s: RegimeSegment, prev: RegimeSegment | null): Segment {
  const seg = quickSegment(tr, s);
  const rate = tr.env.outputRateHz;
  let series: EnvelopeSeries;
  let opts: { backgroundPower?: number; refTimeS?: number } = {};
  if (s.state === STATE_GROWTH) {
    const lo = Math.max(prev !== null && prev.state === STATE_QUIET ? prev.startIdx : s.startIdx, tr.validFrom);
    const w0 = contiguousStart(tr, s.startIdx, Math.round(0.5 * rate), lo);
    let top = 0;
    for (let k = s.startIdx; k < s.endIdx; k++) if (!tr.clipped[k] && tr.power[k] > top) top = tr.power[k];
    let w1 = s.startIdx;
    while (w1 < s.endIdx && !(tr.power[w1] > 0.01 * top)) w1++;
    w1 = contiguousEnd(tr, s.startIdx, w1 - s.startIdx, w1);
    series = buildSeries(tr, w0, w1, false);
    const bg = meanPower(tr, w0, s.startIdx - Math.round(0.1 * rate), Math.round(BG_MIN_S * rate));
    if (Number.isFinite(bg) && bg > 0) opts = { backgroundPower: bg };
  } else {
    const w0 = Math.min(s.endIdx - 1, s.startIdx + tr.env.kernelLength);
    const w1 = contiguousEnd(tr, w0, Math.max(s.endIdx, tr.processed) - w0, Math.max(s.endIdx, tr.processed));
    series = buildSeries(tr, w0, w1, false);
  }
  if (series.timeS.length === 0) return seg;
  const fit = fitExponential(series, { ...opts, refTimeS: series.timeS[0] });
  if (fit.isValid && (s.state === STATE_GROWTH ? fit.ratePerS > 0 : fit.ratePerS < 0)) {
    seg.ratePerS = fit.ratePerS;
    seg.rateCi95PerS = ciOf(fit);
    seg.model = 'exponential';
  }
  return seg;
}

/** Collects what the regime steps of one frame closed, for the live update. */
function collectLive(ps: PipelineState, tr: TrackRuntime): void {
  const rg = tr.regime;
  if (tr.isSteadyLine) return;
  if (rg.onsetInStep) {
    // Announced already by the look-ahead: not twice.
    if (tr.earlyOnsetIdx < 0) ps.liveOnsets.push({ timeS: tr.timeS[rg.onsetIdx], frequencyHz: tr.tone.freqHz });
    tr.earlyOnsetIdx = -1;
  }
  // Closed growth and decay segments get a quick provisional rate; finish() fits them properly.
  for (let i = rg.segments.length - rg.closedInStep; i < rg.segments.length; i++) {
    const s = rg.segments[i];
    if (s.endIdx <= s.startIdx) continue;
    // A growth or decay of the noise is shown as quiet (the same test as the report's, on the envelope seen so far).
    const isNoise = (s.state === STATE_GROWTH || s.state === STATE_DECAY) && isNoiseSegment(tr, s, tr.processed);
    if (!isNoise && (s.state === STATE_GROWTH || s.state === STATE_DECAY)) ps.liveSegments.push(liveSegment(tr, s, i > 0 ? rg.segments[i - 1] : null));
    else {
      ps.liveSegments.push(unfittedSegment(tr, s, isNoise ? 'quiet' : regimeKind(s.state)));
    }
  }
}

/** Emits track rows up to time tMax. */
function emitRows(ps: PipelineState, tMax: number): void {
  const ringLen = ps.envMs.length;
  for (;;) {
    const g = ps.rowG;
    const t = timeOfG(ps, g);
    if (t > tMax || g * ps.envM + ps.envM > ps.j) break;
    if (t < 0) {
      // The first envelope samples describe input before the record (filter delays): no row.
      ps.rowG += ps.rowEvery;
      continue;
    }
    // Main tone of the row: the non-steady track with the largest excess over its background.
    let best: TrackRuntime | null = null;
    let bestEx = -Infinity;
    let bestK = 0;
    for (const tr of ps.alive) {
      const k = g - tr.g0;
      if (k < tr.validFrom || k >= tr.processed) continue;
      const b = tr.bg[k] > 0 ? tr.bg[k] : 1e-30;
      let ex = 10 * Math.log10(tr.power[k] / b);
      if (tr.isSteadyLine) ex -= 100;
      if (ex > bestEx) {
        bestEx = ex;
        best = tr;
        bestK = k;
      }
    }
    const ms = ps.envMs[g % ringLen];
    const hasTone = best !== null && (best.state[bestK] !== STATE_QUIET || bestEx > 6);
    ps.frames.push({
      timeS: t,
      frequencyHz: hasTone && best !== null ? best.tone.freqHz : Number.NaN,
      amplitudeDbfs: hasTone && best !== null ? 10 * Math.log10(Math.max(best.power[bestK], 1e-30)) : Number.NaN,
      // Full-scale sine = 0 dBFS: mean square 0.5.
      levelDbfs: 10 * Math.log10(Math.max(2 * ms, 1e-30)),
      state: best !== null ? regimeKind(best.state[bestK]) : 'quiet',
      isClipped: ps.envClip[g % ringLen] !== 0,
      isAfterGap: ps.rowAfterGap,
    });
    ps.rowAfterGap = false;
    ps.rowG += ps.rowEvery;
  }
}

/** Closes the open quiet stretch at global analysis index jEnd and estimates noise-driven damping. */
function closeQuietStretch(ps: PipelineState, jEnd: number): void {
  if (!ps.quietOpen) return;
  ps.quietOpen = false;
  const cap = ps.quietRing.length;
  const j0 = Math.max(ps.quietStartJ, jEnd - cap);
  const len = jEnd - j0;
  if (len < QUIET_MIN_S * ps.fsA) return;
  const x = new Float32Array(len);
  for (let q = 0; q < len; q++) x[q] = ps.quietRing[(j0 + q) % cap];
  const centre = findResonance(ps, x);
  if (centre === null) return;
  const r = estimateNoiseDrivenDamping(x, ps.fsA, { centreHz: centre, searchHalfWidthHz: 20 });
  if (!r.combined.isValid) {
    ps.warnings.push(`noise-driven damping near ${centre.toFixed(1)} Hz not estimated: ${r.combined.reason ?? 'fit failed'}`);
    return;
  }
  const entry: NoiseDriven = {
    startS: Math.max(0, timeOfJ(ps, j0)),
    endS: timeOfJ(ps, jEnd - 1),
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
  ps.noiseDriven.push(entry);
}

/**
 * The most prominent peak of the long-averaged (Welch, Hann, 75 % overlap) spectrum of a quiet
 * stretch, away from mains lines and tracked steady lines; null when none stands out.
 */
function findResonance(ps: PipelineState, x: Float32Array): number | null {
  const spec = ps.spec;
  const n = spec.frameSize;
  const hop = spec.hopSize;
  const acc = new Float64Array(spec.binCount);
  let frames = 0;
  const out = spec.fftOut;
  const inp = spec.fftIn;
  for (let s = 0; s + n <= x.length; s += hop) {
    for (let i = 0; i < n; i++) inp[i] = x[s + i] * spec.window[i];
    spec.fft.realTransform(out, inp);
    for (let k = 0; k < spec.binCount; k++) acc[k] += out[2 * k] * out[2 * k] + out[2 * k + 1] * out[2 * k + 1];
    frames++;
  }
  if (frames < 8) return null;
  // Reuse the prefix-floor helper on a scratch spectrum state view.
  const pre = new Float64Array(spec.binCount + 1);
  for (let k = 0; k < spec.binCount; k++) pre[k + 1] = pre[k] + acc[k];
  const view = { ...spec, smooth: acc, prefix: pre } as SpectrumState;
  const steadyHz = [...ps.alive, ...ps.retired].filter((t) => t.isSteadyLine).map((t) => t.tone.freqHz);
  let bestK = -1;
  let bestProm = RESONANCE_MIN_DB;
  const lo = Math.max(ps.loBin + 1, Math.ceil(25 / spec.binHz));
  const hi = Math.min(ps.hiBin - 1, Math.floor((ps.cond.bandHighHz - 25) / spec.binHz));
  for (let k = lo; k < hi; k++) {
    if (!(acc[k] > acc[k - 1] && acc[k] >= acc[k + 1])) continue;
    const f = k * spec.binHz;
    if (isMainsLine(f)) continue;
    if (steadyHz.some((g) => Math.abs(g - f) < 3 * spec.binHz)) continue;
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

/**
 * Early announcement of an onset: the regime reads a tone's envelope only up to the centre of the
 * latest frame (where the band background is known), which delays it by half a frame. For a
 * quiet tone, the newer envelope samples are compared with the latest background scaled by the
 * change of the broadband level since the frame centre (a broadband loudness step moves both; a
 * tone that just started is still far below the broadband level). The same test as the regime's
 * (ON_DB held ON_HOLD) announces the onset live; the regime confirms it later and the report's
 * onset comes from the fit. A false early announcement (not confirmed within 2 s) is dropped.
 */
function lookAhead(ps: PipelineState, tr: TrackRuntime): void {
  const rg = tr.regime;
  if (tr.isSteadyLine || !rg.allowOnsets || rg.state !== STATE_QUIET) return;
  if (tr.earlyOnsetIdx >= 0) {
    if (tr.processed - tr.earlyOnsetIdx > 2 * tr.env.outputRateHz) tr.earlyOnsetIdx = -1;
    return;
  }
  const fr = ps.frameTimeS.length;
  const last = ps.spec.frameCount - 1;
  if (last < tr.bgFrameFrom) return;
  const bgF = tr.bgFrame[last % fr] * rg.baseline;
  if (!(bgF > 0)) return;
  const envLen = ps.envMs.length;
  const span = Math.max(1, Math.round(0.1 * tr.env.outputRateHz));
  // Broadband mean square over 0.1 s around the frame centre and over the latest 0.1 s.
  const gF = tr.g0 + Math.min(tr.n - 1, Math.max(0, tr.processed - 1));
  let msF = 0;
  for (let q = 0; q < span; q++) msF += ps.envMs[(gF - q + envLen) % envLen];
  const onLin = 10 ** (ON_DB_LOOKAHEAD / 10);
  const lowLin = 10 ** (LOW_DB_LOOKAHEAD / 10);
  let hold = 0;
  let lastLow = tr.processed;
  let msNow = msF;
  for (let k = tr.processed; k < tr.n; k++) {
    const g = tr.g0 + k;
    msNow += ps.envMs[g % envLen] - ps.envMs[(g - span + envLen) % envLen];
    if (tr.clipped[k]) return;
    const scale = Math.min(10, Math.max(0.1, msNow / msF));
    const ratio = tr.power[k] / (bgF * scale);
    if (ratio <= lowLin) lastLow = k;
    hold = ratio >= onLin ? hold + 1 : 0;
    if (hold >= rg.onHoldMin && lastLow - rg.quietStartIdx >= rg.minQuiet) {
      tr.earlyOnsetIdx = lastLow;
      ps.liveOnsets.push({ timeS: tr.timeS[lastLow], frequencyHz: tr.tone.freqHz });
      return;
    }
  }
}

/**
 * Two tracks on one tone (a second track can start while the first is still moving, e.g. during a
 * fast growth whose frequency drifts) are merged: the older keeps its envelope history and takes
 * the latest frequency; the younger is dropped, so one tone gives one segment history. When the
 * younger saw the tone clearly stronger (DUPLICATE_SKIRT_RATIO) the older held it through the
 * skirt of its band (left on a nearby resonance while the tone moved further than the match
 * tolerance) and is the one dropped: the younger's envelope was rebuilt from the sample history.
 */
function mergeDuplicateTracks(ps: PipelineState): void {
  for (let a = ps.alive.length - 1; a >= 1; a--) {
    const ta = ps.alive[a];
    for (let b = 0; b < a; b++) {
      const tb = ps.alive[b];
      if (Math.abs(ta.tone.freqHz - tb.tone.freqHz) > matchToleranceHz(ps.spec.binHz, tb.tone.freqHz)) continue;
      const [keep, drop, at] = ta.maxExcessDb > tb.maxExcessDb + DUPLICATE_SKIRT_DB ? [ta, tb, b] : [tb, ta, a];
      if (drop.tone.lastHitFrame > keep.tone.lastHitFrame) {
        keep.tone.freqHz = drop.tone.freqHz;
        keep.tone.lastHitFrame = drop.tone.lastHitFrame;
        keep.tone.misses = 0;
      }
      if (drop.maxExcessDb > keep.maxExcessDb) keep.maxExcessDb = drop.maxExcessDb;
      ps.alive.splice(at, 1);
      ps.aliveTones.splice(at, 1);
      break;
    }
  }
}

/**
 * Tolerance for a line at n·f0 to be the n-th harmonic of a tone tracked at f0, Hz: the harmonic's
 * own peak error (3/4 bin) plus n times the tracked fundamental's uncertainty (a quarter bin, or
 * 1 % while it drifts in a growth; common practice: errors of f0 scale with the harmonic number).
 */
function harmonicToleranceHz(binHz: number, f0Hz: number, n: number): number {
  return 0.75 * binHz + n * Math.max(0.25 * binHz, 0.01 * f0Hz);
}

/** Work done at each spectral frame. */
function processFrame(ps: PipelineState): void {
  const spec = ps.spec;
  computeSpectrumFrame(spec);
  ps.sawFrame = true;
  const frameIdx = spec.frameCount - 1;
  const fr = ps.frameTimeS.length;
  const tF = timeOfJ(ps, ps.j - 1 - (spec.frameSize - 1) / 2);
  ps.frameTimeS[frameIdx % fr] = tF;
  const slot = ps.frameRing[frameIdx % fr];
  for (let k = 0; k < spec.binCount; k++) slot[k] = spec.power[k];

  findPeaks(spec, ps.loBin, ps.hiBin, PEAK_MIN_DB, ps.peaks);
  suppressLeakage(spec, ps.peaks);
  groupHarmonics(spec, ps.peaks, ps.loBin, ps.hiBin, SUBHARMONIC_MIN_DB);
  stepTracker(ps.tracker, ps.aliveTones, ps.peaks, frameIdx, tF, NEW_TRACK_MIN_DB);
  mergeDuplicateTracks(ps);

  for (const tr of ps.alive) {
    // A tone settling on a mains multiple is a steady line (its first frames may be off while it switches on).
    if (!tr.isSteadyLine && tr.tone.lastHitFrame === frameIdx && isMainsLine(tr.tone.freqHz)) {
      tr.isSteadyLine = true;
      tr.regime.allowOnsets = false;
    }
    // Retune only when the tone has moved well inside the band: a fixed demodulation frequency
    // keeps arg z a straight line whose slope gives the frequency precisely (segmentFrequency).
    if (Math.abs(tr.tone.freqHz - tr.env.freqHz) > RETUNE_HZ) setEnvelopeFrequency(tr.env, tr.tone.freqHz);
    tr.bgFrame[frameIdx % fr] = bandBackground(ps, spec.power, tr.tone.freqHz);
  }
  // New tones.
  const tk = ps.tracker;
  // Clipping spreads harmonics over the spectrum: no new tones from clipped frames (and the
  // tentative peaks seen in them are forgotten).
  const frameClipped = ps.lastClipJ >= ps.j - spec.frameSize;
  if (frameClipped) resetTentative(tk);
  for (let c = 0; c < tk.confirmedCount && !frameClipped; c++) {
    const f = tk.confirmedFreqHz[c];
    let dup = false;
    for (const tr of ps.alive) {
      // Same tone, or a harmonic of a tone sounding now (a limit cycle's waveform, distortion).
      const n = Math.round(f / tr.tone.freqHz);
      // A peak that no track matched within its tolerance is a tone of its own (a track left on
      // a nearby resonance would read it through the skirt of its band); the finish drops the
      // weaker of two tracks that hold one tone.
      if (n === 1 && Math.abs(f - tr.tone.freqHz) <= matchToleranceHz(spec.binHz, tr.tone.freqHz)) dup = true;
      const isSounding = tr.regime.state > STATE_QUIET || tr.isSteadyLine;
      if (n >= 2 && n <= MAX_HARMONIC && isSounding && Math.abs(f - n * tr.tone.freqHz) <= harmonicToleranceHz(spec.binHz, tr.tone.freqHz, n)) dup = true;
    }
    if (dup) continue;
    if (ps.alive.length >= MAX_TRACKS) {
      // Make room: the quiet track unseen longest.
      let victim = -1;
      for (let i = 0; i < ps.alive.length; i++) {
        const tr = ps.alive[i];
        if (tr.regime.state > STATE_QUIET) continue;
        if (victim < 0 || tr.tone.lastHitFrame < ps.alive[victim].tone.lastHitFrame) victim = i;
      }
      if (victim < 0) continue;
      retireTrack(ps, victim);
    }
    startTrack(ps, f, tk.confirmedProm[c], frameIdx);
  }
  // Regimes up to the frame centre.
  let anyActive = false;
  let earliestGrowthJ = Infinity;
  for (const tr of ps.alive) {
    beginRegimeStep(tr.regime);
    advanceRegime(ps, tr, tF);
    collectLive(ps, tr);
    if (!tr.isSteadyLine && tr.regime.state > STATE_QUIET) {
      anyActive = true;
      // Where this tone left the quiet state, in analysis samples.
      const segs = tr.regime.segments;
      const startIdx = segs.length > 0 ? segs[segs.length - 1].endIdx : tr.regime.segStart;
      const tStart = tr.timeS[Math.min(startIdx, tr.n - 1)];
      const jAt = ps.jBase + Math.floor((tStart - timeOfJ(ps, ps.jBase)) * ps.fsA);
      if (jAt < earliestGrowthJ) earliestGrowthJ = jAt;
    }
  }
  for (const tr of ps.alive) lookAhead(ps, tr);
  emitRows(ps, tF);

  // Quiet store for noise-driven damping.
  if (anyActive && ps.quietOpen) closeQuietStretch(ps, Math.max(ps.quietStartJ, Math.min(ps.j, earliestGrowthJ) - Math.round(QUIET_GUARD_S * ps.fsA)));
  else if (!anyActive && !ps.quietOpen) {
    // The stretch starts a guard after the last tone went quiet, so a decay's tail stays out.
    ps.quietOpen = true;
    ps.quietStartJ = ps.spec.frameCount > 1 ? ps.j + Math.round(QUIET_AFTER_DECAY_S * ps.fsA) : ps.j;
  }

  // Retire tracks unseen and quiet for a while.
  const retireFrames = Math.round((RETIRE_AFTER_S * ps.fsA) / spec.hopSize);
  for (let i = ps.alive.length - 1; i >= 0; i--) {
    const tr = ps.alive[i];
    if (frameIdx - tr.tone.lastHitFrame < retireFrames) continue;
    const rg = tr.regime;
    if (rg.state > STATE_QUIET) continue;
    if (rg.state === STATE_QUIET && tr.processed - rg.quietStartIdx < RETIRE_AFTER_S * tr.env.outputRateHz) continue;
    retireTrack(ps, i);
  }
}

/** Processes the conditioner's output samples. */
function processConditioned(ps: PipelineState): void {
  const x = ps.cond.out;
  const clip = ps.cond.outClipped;
  const cnt = ps.cond.outCount;
  const m = ps.envM;
  const ringCap = ps.ring.length;
  const envLen = ps.envMs.length;
  const qCap = ps.quietRing.length;
  let i = 0;
  while (i < cnt) {
    const k = Math.min(cnt - i, ps.spec.toFrame, ps.envScratch.length * m - m);
    let j = ps.j;
    let rp = j % ringCap;
    let qp = j % qCap;
    let ph = j % m;
    const ring = ps.ring;
    const qRing = ps.quietRing;
    // The quiet store is only read while a quiet stretch is open.
    const quietOpen = ps.quietOpen;
    let accMs = ps.accMs;
    let accClip = ps.accClip;
    for (let q = i; q < i + k; q++) {
      const v = x[q];
      ring[rp] = v;
      if (quietOpen) qRing[qp] = v;
      if (++rp === ringCap) rp = 0;
      if (++qp === qCap) qp = 0;
      accMs += v * v;
      if (clip[q]) {
        accClip = 1;
        ps.lastClipJ = j;
      }
      j++;
      if (++ph === m) {
        ph = 0;
        const g = j / m - 1;
        ps.envMs[g % envLen] = accMs / m;
        ps.envClip[g % envLen] = accClip;
        accMs = 0;
        accClip = 0;
      }
    }
    ps.accMs = accMs;
    ps.accClip = accClip;
    for (const tr of ps.alive) {
      // Demodulators share the envelope clock: the next output closes the boxcar ending at a multiple of m.
      const g = (ps.j + m - tr.env.phase) / m - 1;
      const produced = stepEnvelope(tr.env, x, i, i + k, ps.envScratch, ps.envWideScratch, ps.envPhaseScratch, 0);
      appendEnvelope(ps, tr, produced, g);
    }
    ps.j = j;
    if (ps.ringStartJ < j - ringCap) ps.ringStartJ = j - ringCap;
    if (ps.quietOpen && ps.quietStartJ < j - qCap) ps.quietStartJ = j - qCap;
    // The early onset test runs on every new envelope sample, not only at frames (a frame hop is
    // 0.16 s, several e-folds of a fast growth). It uses the latest frame's background either way,
    // so the samples it sees and the answer do not depend on how the input is cut into blocks.
    if (ps.spec.frameCount > 0) for (const tr of ps.alive) lookAhead(ps, tr);
    if (feedSpectrum(ps.spec, x, i, i + k)) processFrame(ps);
    i += k;
  }
}

function emptyUpdate(ps: PipelineState): AnalysisUpdate {
  return {
    frames: ps.frames,
    onsets: ps.liveOnsets,
    segments: ps.liveSegments,
    spectrumDbfs: null,
    spectrumBinHz: ps.spec.binHz,
    peakAbs: 0,
    isClipped: false,
  };
}

function push(ps: PipelineState, block: Float32Array): AnalysisUpdate {
  if (ps.isFinished) throw new Error('push() after finish(): start a new analysis');
  ps.frames = [];
  ps.liveOnsets = [];
  ps.liveSegments = [];
  ps.sawFrame = false;
  let peak = 0;
  let isClipped = false;
  for (let s = 0; s < block.length; s += CONDITION_MAX_BLOCK) {
    const part = block.subarray(s, Math.min(block.length, s + CONDITION_MAX_BLOCK));
    stepCondition(ps.cond, part);
    if (ps.cond.peakAbs > peak) peak = ps.cond.peakAbs;
    if (ps.cond.isClipped) isClipped = true;
    processConditioned(ps);
  }
  ps.durationInputSamples += block.length;
  const up = emptyUpdate(ps);
  up.peakAbs = peak;
  up.isClipped = isClipped;
  if (ps.sawFrame) {
    // Only the analysed band is converted (the rest stays at the floor value).
    const p = ps.spec.power;
    const out = ps.spectrumDbfs;
    const hi = Math.min(out.length, ps.hiBin + 1);
    for (let k = 0; k < hi; k++) out[k] = 10 * Math.log10(p[k] > 1e-20 ? p[k] : 1e-20);
    ps.hasSpectrum = true;
  }
  up.spectrumDbfs = ps.hasSpectrum ? ps.spectrumDbfs : null;
  return up;
}

function gap(ps: PipelineState, missingSamples: number): void {
  if (!(missingSamples > 0) || !Number.isFinite(missingSamples)) return;
  const missing = Math.round(missingSamples);
  // Everything before the gap is settled with the last background.
  for (const tr of ps.alive) {
    advanceRegime(ps, tr, Infinity);
    restartRegime(tr.regime, tr.n);
    tr.validFrom = tr.n + tr.env.settleSamples;
    resetEnvelope(tr.env, 0);
  }
  emitRows(ps, Infinity);
  closeQuietStretch(ps, ps.j);
  gapCondition(ps.cond, missing);
  resetSpectrumFraming(ps.spec);
  resetTentative(ps.tracker);
  ps.durationInputSamples += missing;
  // New time base: analysis index j (next, aligned to the envelope clock) starts after the gap.
  const m = ps.envM;
  const jNext = Math.ceil(ps.j / m) * m;
  ps.accMs = 0;
  ps.accClip = 0;
  ps.j = jNext;
  ps.jBase = jNext;
  ps.inBase = ps.durationInputSamples;
  ps.ringStartJ = jNext;
  ps.frameFloor = ps.spec.frameCount;
  // Rows resume at the first envelope time after the gap (envelope times lag the samples by the filter delay).
  ps.rowG = jNext / m + Math.ceil(ps.envDelayS * ps.envRateHz);
  ps.rowAfterGap = true;
  for (const tr of ps.alive) {
    tr.bgFrameFrom = ps.spec.frameCount;
    tr.frameCursor = ps.spec.frameCount;
  }
}

/** Builds the envelope series of store entries [i0, i1) of a track, without clipped stretches. */
function buildSeries(tr: TrackRuntime, i0: number, i1: number, isWide: boolean): EnvelopeSeries {
  const src = isWide ? tr.powerWide : tr.power;
  const guard = Math.round(CLIP_GUARD_S * tr.env.outputRateHz);
  const keep = new Uint8Array(Math.max(0, i1 - i0));
  let lastClip = -Infinity;
  for (let k = i0 - guard; k < i1 + guard; k++) {
    if (k >= 0 && k < tr.n && tr.clipped[k]) lastClip = k;
    // Forward pass marks samples within guard after a clip; backward handled below.
    const q = k;
    if (q >= i0 && q < i1) keep[q - i0] = q - lastClip > guard ? 1 : 0;
  }
  let nextClip = Infinity;
  for (let k = i1 + guard - 1; k >= i0; k--) {
    if (k < tr.n && tr.clipped[k]) nextClip = k;
    if (k < i1 && nextClip - k <= guard) keep[k - i0] = 0;
  }
  let count = 0;
  for (let q = 0; q < keep.length; q++) count += keep[q];
  // Neighbouring envelope samples are correlated over about 1/(2B): averaging blocks of up to a
  // quarter of that keeps at least 2 samples per correlation time (so N_eff = 2·B·D is unchanged)
  // and makes the fits several times faster. The fit's dispersion absorbs the smaller scatter.
  const bw = isWide ? tr.env.wideBandwidthHz : tr.env.bandwidthHz;
  const block = Math.max(1, Math.floor(tr.env.outputRateHz / (4 * bw)), Math.ceil(count / MAX_FIT_SAMPLES));
  const nOut = Math.ceil(count / block);
  const timeS = new Float64Array(nOut);
  const power = new Float64Array(nOut);
  let o = 0;
  let acc = 0;
  let accT = 0;
  let inBlock = 0;
  for (let k = i0; k < i1; k++) {
    if (!keep[k - i0]) continue;
    acc += src[k];
    accT += tr.timeS[k];
    inBlock++;
    if (inBlock === block) {
      timeS[o] = accT / block;
      power[o] = acc / block;
      o++;
      acc = 0;
      accT = 0;
      inBlock = 0;
    }
  }
  if (inBlock > 0 && o < nOut) {
    timeS[o] = accT / inBlock;
    power[o] = acc / inBlock;
    o++;
  }
  return { timeS: timeS.subarray(0, o), power: power.subarray(0, o), bandwidthHz: isWide ? tr.env.wideBandwidthHz : tr.env.bandwidthHz };
}

/** First index ≥ lo of a contiguous run (no gap in time) ending at idx, stepping back at most maxBack entries. */
function contiguousStart(tr: TrackRuntime, idx: number, maxBack: number, lo: number): number {
  const dt = 1.5 / tr.env.outputRateHz;
  let k = idx;
  const stop = Math.max(lo, idx - maxBack, 0);
  while (k > stop && tr.timeS[k] - tr.timeS[k - 1] <= dt) k--;
  return k;
}

function contiguousEnd(tr: TrackRuntime, idx: number, maxFwd: number, hi: number): number {
  const dt = 1.5 / tr.env.outputRateHz;
  let k = idx;
  const stop = Math.min(hi, idx + maxFwd, tr.n);
  while (k + 1 < stop && tr.timeS[k + 1] - tr.timeS[k] <= dt) k++;
  return k + 1;
}

/** Mean envelope power over store entries [i0, i1) that are not clipped; NaN when too few. */
function meanPower(tr: TrackRuntime, i0: number, i1: number, minCount: number, isWide = false): number {
  const src = isWide ? tr.powerWide : tr.power;
  let s = 0;
  let c = 0;
  for (let k = Math.max(0, i0); k < Math.min(tr.n, i1); k++) {
    if (tr.clipped[k] || k < tr.validFrom) continue;
    s += src[k];
    c++;
  }
  return c >= minCount ? s / c : Number.NaN;
}

function meanBg(tr: TrackRuntime, i0: number, i1: number): number {
  let s = 0;
  let c = 0;
  for (let k = Math.max(0, i0); k < Math.min(tr.n, i1); k++) {
    if (tr.bg[k] > 0) {
      s += tr.bg[k];
      c++;
    }
  }
  return c > 0 ? s / c : Number.NaN;
}

/** True when no other tone lies within the wide envelope band's reach of this track's tone. */
function wideBandIsClear(ps: PipelineState, tr: TrackRuntime, artefacts: Set<TrackRuntime>): boolean {
  const f = tr.tone.freqHz;
  const same = matchToleranceHz(ps.spec.binHz, f);
  // Lines that belong to a stronger tone (its sidelobes, harmonics) are not other tones.
  // A line NEAR_LINE_DB weaker than this tone's peak only adds to the fitted background.
  const floor = peakPower(tr) * 10 ** (-NEAR_LINE_DB / 10);
  const isOther = (o: TrackRuntime): boolean =>
    o !== tr && !artefacts.has(o) && Math.abs(o.tone.freqHz - f) > same && Math.abs(o.tone.freqHz - f) < WIDE_CLEARANCE_HZ && peakPower(o) > floor;
  for (const o of ps.alive) if (isOther(o)) return false;
  for (const o of ps.retired) if (isOther(o)) return false;
  return true;
}

/**
 * A track on a mains frequency is a steady line, unless it grows out of the background the way a
 * tone does: a growth segment after MIN_QUIET of quiet that rises MAINS_TONE_RISE_DB and takes
 * longer than MAINS_TONE_MIN_RISE_KERNELS envelope kernels (a line switched on rises within about
 * one kernel, the filter's own response to a step). Such a track becomes a tone and the growth an onset.
 */
function reclaimMainsTone(tr: TrackRuntime): void {
  const segs = tr.regime.segments;
  const minQuiet = tr.regime.minQuiet;
  const riseLin = 10 ** (MAINS_TONE_RISE_DB / 10);
  let isTone = false;
  for (let i = 1; i < segs.length; i++) {
    const s = segs[i];
    const prev = segs[i - 1];
    if (s.state !== STATE_GROWTH || prev.state !== STATE_QUIET || prev.endIdx - prev.startIdx < minQuiet) continue;
    if (s.endIdx - s.startIdx < MAINS_TONE_MIN_RISE_KERNELS * tr.env.kernelLength) continue;
    const start = meanPower(tr, s.startIdx - tr.env.kernelLength, s.startIdx + 1, 1);
    let top = 0;
    for (let k = s.startIdx; k < s.endIdx; k++) if (!tr.clipped[k] && tr.power[k] > top) top = tr.power[k];
    if (!(top > riseLin * start)) continue;
    s.isOnset = true;
    isTone = true;
  }
  if (isTone) {
    tr.isSteadyLine = false;
    tr.regime.allowOnsets = true;
  }
}

/** Peak envelope power of a track over its valid, unclipped samples (envelope power units; computed once, at finish). */
function peakPower(tr: TrackRuntime): number {
  if (tr.topPower >= 0) return tr.topPower;
  let top = 0;
  for (let k = tr.validFrom; k < tr.n; k++) if (!tr.clipped[k] && tr.power[k] > top) top = tr.power[k];
  tr.topPower = top;
  return top;
}

/** The test of relabelNoiseSegments for one segment, reading the store up to entry `limit` (exclusive). */
function isNoiseSegment(tr: TrackRuntime, s: RegimeSegment, limit: number): boolean {
  const pad = Math.round(NOISE_PAD_S * tr.env.outputRateHz);
  const i0 = Math.max(tr.validFrom, s.startIdx - pad);
  const i1 = Math.min(tr.n, limit, s.endIdx + pad);
  const vals: number[] = [];
  let bgSum = 0;
  let bgCount = 0;
  for (let k = i0; k < i1; k++) {
    if (tr.clipped[k]) continue;
    vals.push(tr.power[k]);
    if (tr.bg[k] > 0) {
      bgSum += tr.bg[k];
      bgCount++;
    }
  }
  if (vals.length < 8 || bgCount === 0) return false;
  vals.sort((a, b) => a - b);
  const noiseMean = vals[Math.floor(0.2 * vals.length)] / -Math.log(0.8);
  if (!(noiseMean < 10 ** (NOISE_SPAN_DB / 10) * (bgSum / bgCount))) {
    // Far above the spectral background: noise only if the envelope jumps about as noise does
    // (a noise-driven resonance), not if it is smooth (a dip in a loud tone). Mean square second
    // difference of ln A² at 0.2 s lag: about 6-10 for noise, under 1 for a tone (regime.ts endWarmup).
    const lag = Math.max(1, Math.round(0.2 * tr.env.outputRateHz));
    let d2 = 0;
    let cnt = 0;
    for (let k = i0 + lag; k + lag < i1; k++) {
      const d = Math.log(Math.max(tr.power[k + lag], 1e-30)) - 2 * Math.log(Math.max(tr.power[k], 1e-30)) + Math.log(Math.max(tr.power[k - lag], 1e-30));
      d2 += d * d;
      cnt++;
    }
    if (!(cnt > 0 && d2 / cnt > NOISE_D2)) return false;
  }
  let top = 0;
  for (let k = Math.max(s.startIdx, tr.validFrom); k < s.endIdx; k++) if (!tr.clipped[k] && tr.power[k] > top) top = tr.power[k];
  return !(top > 10 ** (ON_DB / 10) * noiseMean);
}

/**
 * Growth and decay segments of noise become quiet (and neighbouring quiet segments join). The
 * noise level around a segment is the band's own level where it is lowest: the 20th percentile
 * of the envelope power over the segment and NOISE_PAD_S either side, divided by −ln 0.8 (A² of
 * narrow-band noise is exponentially distributed). A segment whose top stays below ON_DB over that
 * level holds no tone beyond chance (P(A² > 16·mean) = e^−16 per correlation time); the test
 * applies only where that lowest level is itself within NOISE_SPAN_DB of the spectral background
 * (a dip in a loud tone is not noise). Common practice for exponential envelope statistics.
 */
function relabelNoiseSegments(tr: TrackRuntime): void {
  const segs = tr.regime.segments;
  for (const s of segs) {
    if ((s.state === STATE_GROWTH || s.state === STATE_DECAY) && isNoiseSegment(tr, s, tr.processed)) {
      s.state = STATE_QUIET;
      s.isOnset = false;
      s.reachedSteady = false;
    }
  }
  // Join neighbouring quiet segments.
  let w = 0;
  for (let r = 0; r < segs.length; r++) {
    const s = segs[r];
    if (w > 0 && s.state === STATE_QUIET && segs[w - 1].state === STATE_QUIET && segs[w - 1].endIdx === s.startIdx) {
      segs[w - 1].endIdx = s.endIdx;
      continue;
    }
    segs[w++] = s;
  }
  segs.length = w;
}

interface FittedSegment {
  tr: TrackRuntime;
  seg: RegimeSegment;
  report: Segment;
  fit: RateFit | null;
  onsetTimeS: number | null;
}

function ciOf(fit: RateFit): Interval {
  return [fit.ci95PerS[0], fit.ci95PerS[1]];
}

/** Fits one segment of a track and fills its report entry (and the onset time for onsets). */
/**
 * Store index where a decay near a 'driving-off' marker begins: the kink of the envelope within
 * MARKER_SEARCH_S of the marker (dsp/kink.ts), between the start of the stretch before the decay
 * and the point where the decay meets the background. A warning says so when marker and data
 * disagree by more than the envelope's resolution (one kernel); with no kink found the marker
 * stands.
 */
function markerKink(ps: PipelineState, tr: TrackRuntime, seg: RegimeSegment, prev: RegimeSegment | null, mk: Marker, isWide: boolean): number {
  const rate = tr.env.outputRateHz;
  const src = isWide ? tr.powerWide : tr.power;
  let m = seg.startIdx;
  while (m > 0 && tr.timeS[m] > mk.timeS) m--;
  while (m < tr.processed - 1 && tr.timeS[m] < mk.timeS) m++;
  const reach = Math.round(MARKER_SEARCH_S * rate);
  const lo = Math.max(prev !== null ? prev.startIdx : seg.startIdx, tr.validFrom, m - reach);
  const bgNarrow = meanPower(tr, seg.endIdx + Math.round(0.2 * rate), seg.endIdx + Math.round(BG_WINDOW_S * rate), Math.round(0.1 * rate), isWide);
  const bg = Number.isFinite(bgNarrow) ? bgNarrow : meanBg(tr, seg.startIdx, seg.endIdx) * (isWide ? tr.env.wideBandwidthHz / tr.env.bandwidthHz : 1);
  const markerIdx = Math.min(m, seg.endIdx - 1);
  if (!(bg > 0)) return markerIdx;
  // The two lines hold down to 10 dB over the background, where it bends ln(A² − N²) by < 0.5 dB.
  const floorRatio = 10;
  let hi = Math.max(lo, seg.startIdx);
  const stop = Math.min(tr.processed, m + reach);
  while (hi < stop && src[hi] > bg * floorRatio) hi++;
  hi = contiguousEnd(tr, lo, hi - lo, hi);
  // Each line needs half a kernel beyond the blurred corner; the kink is placed late by under half
  // a kernel on a fast decay (tests/dsp/kink.test.ts), so a marker on time stays within one kernel.
  const kLen = isWide ? tr.env.wideLength : tr.env.kernelLength;
  const kink = findKink(tr.timeS, src, { i0: lo, i1: hi, s0: Math.max(lo, m - reach), s1: Math.min(hi, m + reach), minSide: Math.ceil(kLen / 2), backgroundPower: bg, floorRatio });
  if (kink === null || !(kink.slopeAfter < kink.slopeBefore)) return markerIdx;
  if (Math.abs(kink.timeS - mk.timeS) > kLen / rate) {
    ps.warnings.push(`marker "${mk.label}" at ${mk.timeS.toFixed(2)} s: the envelope turns at ${kink.timeS.toFixed(2)} s; the decay is fitted from there`);
  }
  return kink.index;
}

function fitSegment(ps: PipelineState, tr: TrackRuntime, segs: RegimeSegment[], i: number, artefacts: Set<TrackRuntime>): FittedSegment {
  const seg = segs[i];
  const rate = tr.env.outputRateHz;
  const prev = i > 0 ? segs[i - 1] : null;
  const next = i + 1 < segs.length ? segs[i + 1] : null;
  const startS = tr.timeS[seg.startIdx];
  const endS = tr.timeS[Math.max(seg.startIdx, seg.endIdx - 1)];
  const report: Segment = {
    kind: regimeKind(seg.state),
    startS,
    endS,
    frequencyHz: segmentFrequency(tr, seg),
    ratePerS: null,
    rateCi95PerS: null,
    model: null,
  };
  const out: FittedSegment = { tr, seg, report, fit: null, onsetTimeS: null };
  const bgWin = Math.round(BG_WINDOW_S * rate);
  const bgMin = Math.round(BG_MIN_S * rate);
  const tag = `${report.kind} at ${startS.toFixed(2)} s`;
  if (seg.state === STATE_QUIET) return out;
  const isWide = wideBandIsClear(ps, tr, artefacts);
  // The wide band holds (wide/narrow) times the narrow band's noise power.
  const bgScale = isWide ? tr.env.wideBandwidthHz / tr.env.bandwidthHz : 1;

  if (seg.state === STATE_GROWTH) {
    const quietLo = prev !== null && prev.state === STATE_QUIET ? prev.startIdx : seg.startIdx;
    const w0 = contiguousStart(tr, seg.startIdx, Math.round(GROWTH_PREROLL_S * rate), Math.max(quietLo, tr.validFrom));
    const q0 = Math.max(quietLo, seg.startIdx - bgWin, tr.validFrom);
    const q1 = seg.startIdx - Math.round(0.1 * rate);
    let bgNarrow = meanPower(tr, q0, q1, bgMin);
    if (!Number.isFinite(bgNarrow)) bgNarrow = meanBg(tr, w0, seg.startIdx + 1);
    let bg = meanPower(tr, q0, q1, bgMin, isWide);
    if (!Number.isFinite(bg)) bg = bgNarrow * bgScale;
    // The steady stretch after the growth may be the record's last (next === null).
    const intoSteady = seg.reachedSteady && (next === null || next.state === STATE_STEADY);
    let w1 = seg.endIdx;
    if (intoSteady) {
      const extra = Math.max(Math.round(1.0 * rate), seg.endIdx - seg.startIdx);
      w1 = Math.min(next !== null ? next.endIdx : tr.processed, seg.endIdx + extra);
    }
    w1 = contiguousEnd(tr, seg.startIdx, w1 - seg.startIdx, w1);
    const series = buildSeries(tr, w0, w1, isWide);
    const opts = Number.isFinite(bg) && bg > 0 ? { backgroundPower: bg } : {};
    let fit: RateFit;
    if (intoSteady) {
      // The saturation fit sees the model through the band's own envelope kernel (its taps at the
      // envelope rate), so the knee is not confused with the filter's blur; the early window is
      // cut on the fitted curve (dsp/fit.ts fitGrowthIntoLimit).
      const kLen = isWide ? tr.env.wideLength : tr.env.kernelLength;
      const kernel = { weights: isWide ? tr.env.wideKernel : tr.env.kernel, spacingS: 1 / rate };
      const grown = fitGrowthIntoLimit(series, { ...opts, kernel });
      fit = grown.rate;
      if (grown.saturation.isValid) report.limitAmplitudeDbfs = 20 * Math.log10(grown.saturation.limitAmplitude);
      if (fit.isValid) report.model = grown.model;
      // An exponential from the pre-roll up to the knee less half a kernel (the filter's blur of
      // the knee) keeps the late rise, which holds most of the information on the rate (its
      // Fisher information grows with the power). The regime's segment end lies up to half a
      // narrow kernel before the knee, so the knee is placed where the exponential fitted up to
      // that end meets the level held after it (a sharp knee turns there), and the exponential is
      // refitted up to half a kernel before it. Choice of the reported rate:
      // - the saturation fit (it also uses the knee, through the kernel, and so carries the most
      //   information) when its interval is narrower than the early rise's and it agrees with the
      //   late exponential within 2.5 combined sd (the knee is as sharp as the exponential says)
      //   or with the early rise (fitGrowthIntoLimit's test; for Stuart–Landau twice as lenient,
      //   about 4 sd: on a Landau rise it is the better estimate, and the early window's own small
      //   bias must not discard it);
      // - else the late exponential, when it agrees with the early rise or the saturation fit
      //   within 2.5 combined sd (a rise that bends well before its limit, as Landau's, fails
      //   this) and has the narrower interval (the early window alone is short and now and then
      //   strays by over 3 sd);
      // - else fitGrowthIntoLimit's choice.
      const early = grown.early;
      const halfK = Math.ceil(kLen / 2) + 1;
      const firstCut = Math.min(seg.endIdx, w1) - halfK;
      if (firstCut > seg.startIdx && early !== null && early.isValid) {
        const upTo = (k: number): RateFit => {
          const s1 = buildSeries(tr, w0, contiguousEnd(tr, seg.startIdx, k - seg.startIdx, k), isWide);
          return fitExponential(s1, { ...opts, refTimeS: s1.timeS.length > 0 ? s1.timeS[0] : startS });
        };
        let exp = upTo(firstCut);
        const held = meanPower(tr, Math.min(seg.endIdx, w1) + kLen, w1, kLen, isWide) - (opts.backgroundPower ?? 0);
        if (exp.isValid && exp.ratePerS > 0 && exp.amplitudeAtRef > 0 && held > 0) {
          const kneeS = exp.refTimeS + Math.log(held / (exp.amplitudeAtRef * exp.amplitudeAtRef)) / (2 * exp.ratePerS);
          let cut = firstCut;
          while (cut < w1 && tr.timeS[cut] < kneeS - halfK / rate) cut++;
          if (cut !== firstCut) exp = upTo(cut);
        }
        const sd = (f: RateFit): number => (f.ci95PerS[1] - f.ci95PerS[0]) / (2 * Z95);
        const near = (f: RateFit): boolean => f.isValid && Math.abs(exp.ratePerS - f.ratePerS) <= 2.5 * Math.hypot(sd(exp), sd(f));
        const agrees = exp.isValid && exp.ratePerS > 0 && (near(early) || near(grown.saturation));
        const sat = grown.saturation;
        const satHalf = Math.hypot(sd(sat), sd(early)) * Z95;
        const satAgreesEarly = Math.abs(sat.ratePerS - early.ratePerS) <= (sat.model === 'stuart-landau' ? 2 : 1) * satHalf;
        if (sat.isValid && sat.ratePerS > 0 && sd(sat) < sd(early) && ((exp.isValid && near(sat)) || satAgreesEarly)) {
          fit = sat;
          report.model = sat.model;
        } else if (agrees && (!fit.isValid || sd(exp) < sd(fit))) {
          fit = exp;
          report.model = 'exponential';
        }
      }
    } else {
      fit = fitExponential(series, { ...opts, refTimeS: series.timeS.length > 0 ? series.timeS[0] : startS });
      if (fit.isValid) report.model = 'exponential';
    }
    out.fit = fit;
    if (fit.isValid) {
      report.ratePerS = fit.ratePerS;
      report.rateCi95PerS = ciOf(fit);
    } else ps.warnings.push(`${tag}: no rate (${fit.reason ?? 'fit failed'})`);
    if (seg.isOnset && !tr.isSteadyLine) {
      // Where the fitted curve meets the background of the narrow (about ±5 Hz) band: DESIGN.md.
      const tCross = backgroundCrossingTimeS({ ...fit, backgroundPower: bgNarrow });
      // The crossing lies near the regime's estimate; far away means the fit did not describe the
      // rise. At the segment start the envelope was last seen at the background, so the curve may
      // stand at most ON_DB above the background there: a tone that appears as a step well above
      // the background has a curve that meets the background before anything sounded. That
      // bounds the crossing to ON_DB / (8.686 dB per e-fold × s) before the start (and half a
      // kernel, the envelope's own blur).
      const riseS = fit.isValid && fit.ratePerS > 0 ? ON_DB / (20 * Math.LOG10E * fit.ratePerS) : Infinity;
      const earliest = startS - Math.max(0.5 * tr.env.kernelS, riseS);
      out.onsetTimeS = Number.isFinite(tCross) && tCross > startS - 1 && tCross < endS ? Math.max(earliest, tCross) : startS;
    }
    return out;
  }

  if (seg.state === STATE_DECAY) {
    // A 'driving-off' marker near the start is a hint: the free decay begins at the kink the
    // envelope shows near it (markerKink).
    let startIdx = seg.startIdx;
    let hasMarker = false;
    const lookBackS = prev !== null ? Math.min(2, tr.timeS[seg.startIdx] - tr.timeS[prev.startIdx]) : 0;
    for (const mk of ps.markers) {
      if (mk.kind !== 'driving-off') continue;
      if (mk.timeS < startS - Math.max(lookBackS, MARKER_SEARCH_S) || mk.timeS > startS + MARKER_SEARCH_S) continue;
      startIdx = markerKink(ps, tr, seg, prev, mk, isWide);
      hasMarker = true;
    }
    if (!hasMarker && prev !== null) {
      // Without a marker, the kink is where the wide-band level first falls 1 dB below the level
      // held just before (the narrow band's decay start can lie half a narrow kernel early).
      const ref = meanPower(tr, Math.max(prev.startIdx, seg.startIdx - Math.round(0.5 * rate)), seg.startIdx - Math.ceil(tr.env.kernelLength / 2), 1, true);
      if (Number.isFinite(ref)) {
        let k = Math.max(prev.startIdx, seg.startIdx - Math.ceil(tr.env.kernelLength / 2));
        while (k < seg.endIdx - 1 && tr.powerWide[k] >= ref * 0.794) k++;
        startIdx = k;
        hasMarker = true;
      }
    }
    // Skip the envelope filter's transient: it spans half a kernel either side of the kink (the
    // marker), and the regime's own decay start may lie up to half a kernel before the kink.
    const quietHi = next !== null && next.state === STATE_QUIET ? next.endIdx : seg.endIdx;
    const fitDecay = (wide: boolean): RateFit => {
      const kLen = wide ? tr.env.wideLength : tr.env.kernelLength;
      const skip = hasMarker ? Math.ceil(kLen / 2) + 1 : tr.env.kernelLength + 1;
      const w0 = Math.min(seg.endIdx - 1, startIdx + skip);
      // Background from the quiet after the decay; with too little of it the fit estimates the
      // background itself (the spectral background during the decay holds the loud tone's leakage).
      const b0 = seg.endIdx + Math.round(0.2 * rate);
      const b1 = Math.min(quietHi, seg.endIdx + bgWin);
      let bg = meanPower(tr, b0, b1, bgMin, wide);
      if (!Number.isFinite(bg)) bg = meanPower(tr, b0, b1, Math.round(0.1 * rate), wide);
      let w1 = Math.min(quietHi, seg.endIdx + Math.round(DECAY_TAIL_S * rate));
      w1 = contiguousEnd(tr, w0, w1 - w0, w1);
      const series = buildSeries(tr, w0, w1, wide);
      const opts = Number.isFinite(bg) && bg > 0 ? { backgroundPower: bg } : {};
      return fitExponential(series, { ...opts, refTimeS: series.timeS.length > 0 ? series.timeS[0] : startS });
    };
    let fit = fitDecay(isWide);
    if (!isWide && hasMarker) {
      // A line within the wide band's reach was seen. A fast decay leaves the narrow band only a
      // few independent samples, the wide band many: fit both and keep the tighter interval (a
      // line that disturbs the wide band shows in its residuals and so widens its interval).
      const wideFit = fitDecay(true);
      const half = (f: RateFit): number => (f.isValid ? f.ci95PerS[1] - f.ci95PerS[0] : Infinity);
      if (wideFit.isValid && wideFit.ratePerS < 0 && half(wideFit) < half(fit)) fit = wideFit;
    }
    out.fit = fit;
    if (fit.isValid) {
      report.ratePerS = fit.ratePerS;
      report.rateCi95PerS = ciOf(fit);
      report.model = 'exponential';
    } else ps.warnings.push(`${tag}: no rate (${fit.reason ?? 'fit failed'})`);
    return out;
  }

  // Steady: rate about zero, and the limit-cycle level.
  const series = buildSeries(tr, seg.startIdx, seg.endIdx, false);
  const bg = meanBg(tr, seg.startIdx, seg.endIdx);
  const mp = meanPower(tr, seg.startIdx, seg.endIdx, 1);
  if (Number.isFinite(mp)) report.limitAmplitudeDbfs = 10 * Math.log10(Math.max(mp - (Number.isFinite(bg) ? bg : 0), 1e-30));
  const fit = fitExponential(series, Number.isFinite(bg) && bg > 0 ? { backgroundPower: bg } : {});
  out.fit = fit;
  if (fit.isValid) {
    report.ratePerS = fit.ratePerS;
    report.rateCi95PerS = ciOf(fit);
    report.model = 'exponential';
  }
  return out;
}

/** Inverse-variance pooled rate of several fits (sd from the half-width of each 95 % interval). */
function pooledRate(fits: { rate: number; ci: Interval }[]): { rate: number; ci: Interval } | null {
  if (fits.length === 0) return null;
  if (fits.length === 1) return { rate: fits[0].rate, ci: fits[0].ci };
  let sw = 0;
  let swx = 0;
  for (const f of fits) {
    const sd = (f.ci[1] - f.ci[0]) / (2 * 1.959963984540054);
    if (!(sd > 0)) continue;
    sw += 1 / (sd * sd);
    swx += f.rate / (sd * sd);
  }
  if (!(sw > 0)) return { rate: fits[0].rate, ci: fits[0].ci };
  const m = swx / sw;
  const h = 1.959963984540054 / Math.sqrt(sw);
  return { rate: m, ci: [m - h, m + h] };
}

function finish(ps: PipelineState): Report {
  if (ps.isFinished) throw new Error('finish() called twice');
  ps.isFinished = true;
  for (const tr of ps.alive) {
    advanceRegime(ps, tr, Infinity);
    finishRegime(tr.regime, tr.n);
  }
  closeQuietStretch(ps, ps.j);
  const all = [...ps.retired, ...ps.alive.filter((t) => t.regime.segments.length > 0)];
  for (const tr of all) {
    relabelNoiseSegments(tr);
    if (tr.isSteadyLine) reclaimMainsTone(tr);
  }
  // Tones, grouped by frequency (a tone heard in several cycles may have several tracks).
  interface Family {
    freqHz: number;
    isSteadyLine: boolean;
    strength: number;
    peakPower: number;
    /** Span of its non-quiet segments, s (NaN when none). */
    activeFromS: number;
    activeToS: number;
    tracks: TrackRuntime[];
    /** The stronger tone this line belongs to (harmonic, sidelobe), if any. */
    parent: Family | null;
  }
  const families: Family[] = [];
  // A track beside a loud tone can hold that tone through its band's skirt: two tracks whose
  // active stretches overlap and whose envelopes turn at the same frequency (the phase slope of
  // segmentFrequency) are one tone; the weaker is dropped.
  const duplicates = new Set<TrackRuntime>();
  const trackInfo = new Map<TrackRuntime, { freqHz: number; fromS: number; toS: number; top: number }>();
  for (const tr of all) {
    let from = Number.NaN;
    let to = Number.NaN;
    let sw = 0;
    let swf = 0;
    for (const s of tr.regime.segments) {
      if (s.state === STATE_QUIET || s.endIdx <= s.startIdx) continue;
      const a = tr.timeS[s.startIdx];
      const b = tr.timeS[s.endIdx - 1];
      from = Number.isNaN(from) ? a : Math.min(from, a);
      to = Number.isNaN(to) ? b : Math.max(to, b);
      const f = segmentFrequency(tr, s);
      if (Number.isFinite(f)) {
        sw += s.endIdx - s.startIdx;
        swf += (s.endIdx - s.startIdx) * f;
      }
    }
    const f = sw > 0 ? swf / sw : medianFrequencyHz(tr.tone, -Infinity, Infinity);
    trackInfo.set(tr, { freqHz: f, fromS: from, toS: to, top: peakPower(tr) });
  }
  for (const a of all) {
    const ia = trackInfo.get(a);
    if (ia === undefined || Number.isNaN(ia.fromS)) continue;
    for (const b of all) {
      const ib = trackInfo.get(b);
      if (b === a || ib === undefined || Number.isNaN(ib.fromS) || duplicates.has(b)) continue;
      if (ib.toS < ia.fromS || ib.fromS > ia.toS) continue;
      // Keep the track whose band is centred on the tone (it sees the tone clearly stronger than
      // one holding it through its skirt, and its envelope was rebuilt from the sample history,
      // growth included); between two that see it alike, the one that saw it first, then the stronger.
      const level = ib.top / ia.top;
      const bFirst =
        level > DUPLICATE_SKIRT_RATIO ||
        (level >= 1 / DUPLICATE_SKIRT_RATIO && (ib.fromS < ia.fromS - DUPLICATE_START_S || (Math.abs(ib.fromS - ia.fromS) <= DUPLICATE_START_S && ib.top > ia.top)));
      if (!bFirst) continue;
      if (Math.abs(ia.freqHz - ib.freqHz) <= matchToleranceHz(ps.spec.binHz, ib.freqHz)) {
        duplicates.add(a);
        break;
      }
    }
  }
  for (const tr of all) {
    if (duplicates.has(tr)) continue;
    if (tr.regime.segments.every((s) => s.state === STATE_QUIET) && !tr.isSteadyLine && tr.maxExcessDb < 10) continue;
    const info = trackInfo.get(tr);
    if (info === undefined) continue;
    const f = info.freqHz;
    const top = info.top;
    const from = info.fromS;
    const to = info.toS;
    const fam = families.find((q) => Math.abs(q.freqHz - f) <= matchToleranceHz(ps.spec.binHz, f));
    if (fam) {
      fam.tracks.push(tr);
      fam.strength = Math.max(fam.strength, tr.maxExcessDb);
      fam.peakPower = Math.max(fam.peakPower, top);
      fam.isSteadyLine = fam.isSteadyLine && tr.isSteadyLine;
      if (!Number.isNaN(from)) {
        fam.activeFromS = Number.isNaN(fam.activeFromS) ? from : Math.min(fam.activeFromS, from);
        fam.activeToS = Number.isNaN(fam.activeToS) ? to : Math.max(fam.activeToS, to);
      }
    } else families.push({ freqHz: f, isSteadyLine: tr.isSteadyLine, strength: tr.maxExcessDb, peakPower: top, activeFromS: from, activeToS: to, tracks: [tr], parent: null });
  }
  for (const fam of families) {
    // A tone sounding through the whole record (never quiet, no onset) is a steady line too.
    const segs = fam.tracks.flatMap((t) => t.regime.segments);
    if (segs.length > 0 && segs.every((s) => s.state === STATE_STEADY)) fam.isSteadyLine = true;
  }
  // Lines that belong to a stronger tone: a harmonic (at k·f0, weaker) or a sidelobe /
  // intermodulation line close beside it (NEAR_LINE_DB weaker), whose activity lies within the
  // tone's own. They are grouped under it: no onsets, segments or entry of their own.
  const byPower = [...families].sort((a, b) => b.peakPower - a.peakPower);
  const binHz = ps.spec.binHz;
  for (let i = 1; i < byPower.length; i++) {
    const fam = byPower[i];
    for (let j = 0; j < i && fam.parent === null; j++) {
      const par = byPower[j];
      if (par.parent !== null || Number.isNaN(par.activeFromS) && !par.isSteadyLine) continue;
      if (!(fam.peakPower < par.peakPower)) continue;
      const k = Math.round(fam.freqHz / par.freqHz);
      const isHarmonic = k >= 2 && k <= MAX_HARMONIC && Math.abs(fam.freqHz - k * par.freqHz) <= harmonicToleranceHz(binHz, par.freqHz, k);
      const isNear = Math.abs(fam.freqHz - par.freqHz) <= NEAR_LINE_FRACTION * par.freqHz && fam.peakPower * 10 ** (NEAR_LINE_DB / 10) < par.peakPower;
      if (!isHarmonic && !isNear) continue;
      // Rises with it: all its activity within the parent's (steady lines sound throughout), and
      // each of its growths during a growth of the parent (a tone that starts on its own while
      // the parent holds steady is a tone of its own).
      const growths = (q: Family): [number, number][] =>
        q.tracks.flatMap((t) => t.regime.segments.filter((g) => g.state === STATE_GROWTH && g.endIdx > g.startIdx).map((g): [number, number] => [t.timeS[g.startIdx], t.timeS[g.endIdx - 1]]));
      const parGrowths = growths(par);
      const within =
        Number.isNaN(fam.activeFromS) ||
        par.isSteadyLine ||
        (fam.activeFromS >= par.activeFromS - WITHIN_MARGIN_S &&
          fam.activeToS <= par.activeToS + WITHIN_MARGIN_S &&
          growths(fam).every(([a]) => parGrowths.some(([p0, p1]) => a >= p0 - WITHIN_MARGIN_S && a <= p1 + WITHIN_MARGIN_S)));
      if (within) fam.parent = par;
    }
  }
  const artefacts = new Set([...duplicates, ...families.filter((f) => f.parent !== null).flatMap((f) => f.tracks)]);
  const fitted: FittedSegment[] = [];
  for (const tr of all) {
    if (artefacts.has(tr)) continue;
    const segs = tr.regime.segments;
    for (let i = 0; i < segs.length; i++) {
      if (segs[i].endIdx <= segs[i].startIdx) continue;
      fitted.push(fitSegment(ps, tr, segs, i, artefacts));
    }
  }
  families.sort((a, b) => b.strength - a.strength);
  const tones = families.filter((f) => f.parent === null);

  // Tracks of steady lines (mains, or a tone sounding throughout) and tracks that never left the
  // quiet state give no onsets or segments.
  // (A tone sounding through the whole record that is not on a mains line keeps its steady segments.)
  const steadyTracks = new Set(tones.filter((f) => f.isSteadyLine && f.tracks.every((t) => t.isSteadyLine)).flatMap((f) => f.tracks));
  const report = (f: FittedSegment): boolean =>
    !f.tr.isSteadyLine && !steadyTracks.has(f.tr) && f.tr.regime.segments.some((s) => s.state !== STATE_QUIET);
  const onsets: Onset[] = fitted
    .filter((f) => report(f) && f.onsetTimeS !== null)
    .map((f) => ({ timeS: f.onsetTimeS as number, frequencyHz: f.report.frequencyHz }))
    .sort((a, b) => a.timeS - b.timeS);
  // A decay is a fall and a growth a rise: a fitted rate of the other sign (or zero) means the
  // segment is neither; it is reported as steady (still clear of the background) or quiet, without a rate.
  for (const f of fitted) {
    const r = f.report;
    if (r.ratePerS === null || (r.kind !== 'growth' && r.kind !== 'decay')) continue;
    if (r.kind === 'growth' ? r.ratePerS > 0 : r.ratePerS < 0) continue;
    ps.warnings.push(`${r.kind} at ${r.startS.toFixed(2)} s: fitted rate ${r.ratePerS.toPrecision(3)} 1/s has the wrong sign; not a ${r.kind}`);
    const mp = meanPower(f.tr, f.seg.startIdx, f.seg.endIdx, 1);
    const bg = meanBg(f.tr, f.seg.startIdx, f.seg.endIdx);
    r.kind = mp > 10 ** (ON_DB / 10) * bg ? 'steady' : 'quiet';
    r.ratePerS = null;
    r.rateCi95PerS = null;
    r.model = null;
    f.fit = null;
    f.onsetTimeS = null;
  }
  const segments = fitted.filter(report).map((f) => f.report);
  segments.sort((a, b) => a.startS - b.startS);

  // Main tone: the non-steady family with the most onsets, then the strongest.
  let main: Family | null = null;
  let mainScore = -Infinity;
  for (const fam of tones) {
    if (fam.tracks.every((t) => t.isSteadyLine)) continue;
    const famFits = fitted.filter((f) => fam.tracks.includes(f.tr));
    if (!famFits.some((f) => f.seg.state !== STATE_QUIET)) continue;
    const nOn = famFits.filter((f) => f.onsetTimeS !== null).length;
    const score = nOn * 1000 + fam.strength;
    if (score > mainScore) {
      mainScore = score;
      main = fam;
    }
  }
  let summary = deriveSummary({ frequencyHz: null, growth: null, decay: null });
  if (main !== null) {
    const mf = main;
    const famFits = fitted.filter((f) => mf.tracks.includes(f.tr));
    const growth = pooledRate(
      famFits
        .filter((f) => f.seg.state === STATE_GROWTH && f.fit !== null && f.fit.isValid && f.fit.ratePerS > 0)
        .map((f) => ({ rate: (f.fit as RateFit).ratePerS, ci: ciOf(f.fit as RateFit) })),
    );
    const decay = pooledRate(
      famFits
        .filter((f) => f.seg.state === STATE_DECAY && f.fit !== null && f.fit.isValid && f.fit.ratePerS < 0)
        .map((f) => ({ rate: -(f.fit as RateFit).ratePerS, ci: [-(f.fit as RateFit).ci95PerS[1], -(f.fit as RateFit).ci95PerS[0]] as Interval })),
    );
    const steadyFreqs = famFits.filter((f) => f.seg.state === STATE_STEADY).map((f) => f.report.frequencyHz);
    const freqs = steadyFreqs.length > 0 ? steadyFreqs : famFits.filter((f) => f.seg.state !== STATE_QUIET).map((f) => f.report.frequencyHz);
    freqs.sort((a, b) => a - b);
    const freq = freqs.length > 0 ? freqs[Math.floor(freqs.length / 2)] : mf.freqHz;
    // The limit cycle is the level a growth saturated at: the steady stretches a growth reached.
    // Other steady stretches of the tone (a resonance heard in the quiet before the hum, tens of
    // dB lower) would pull the mean down; only a tone never seen growing reports them.
    const steady = famFits.filter((f) => f.seg.state === STATE_STEADY && typeof f.report.limitAmplitudeDbfs === 'number');
    const reached = steady.filter((f) => {
      const i = f.tr.regime.segments.indexOf(f.seg);
      return i > 0 && f.tr.regime.segments[i - 1].state === STATE_GROWTH;
    });
    const limits = (reached.length > 0 ? reached : steady).map((f) => f.report.limitAmplitudeDbfs as number);
    const limit = limits.length > 0 ? limits.reduce((a, b) => a + b, 0) / limits.length : null;
    summary = deriveSummary({
      frequencyHz: freq,
      growth: growth !== null ? { ratePerS: growth.rate, ci95PerS: growth.ci } : null,
      decay: decay !== null ? { decayRatePerS: decay.rate, ci95PerS: decay.ci } : null,
      limitAmplitudeDbfs: limit,
    });
  } else ps.warnings.push('no tone found');

  const clipped: ClippedSpan[] = [];
  for (let i = 0; i < ps.cond.clipCount; i++) clipped.push({ startS: ps.cond.clipStartS[i], endS: ps.cond.clipEndS[i] });
  const clipWarn = clipped.slice(0, 10).map((c) => `clipping in ${c.startS.toFixed(2)}–${c.endS.toFixed(2)} s`);
  if (clipped.length > 10) clipWarn.push(`clipping in ${clipped.length - 10} more stretches`);
  if (ps.cond.clipDropped > 0) clipWarn.push(`${ps.cond.clipDropped} further clipped stretches not listed`);
  if (ps.cfg.bandHighHz > ps.cond.bandHighHz) {
    ps.warnings.push(`band limited to ${ps.cond.bandHighHz.toFixed(0)} Hz by the sample rate`);
  }
  return {
    reportVersion: REPORT_VERSION,
    sampleRateHz: ps.cfg.sampleRateHz,
    durationS: ps.durationInputSamples / ps.cfg.sampleRateHz,
    onsets,
    segments,
    noiseDriven: ps.noiseDriven,
    summary,
    tones: tones.map((f) => ({ frequencyHz: f.freqHz, isSteadyLine: f.isSteadyLine })),
    clipped,
    warnings: [...clipWarn, ...ps.warnings],
  };
}

function createPipelineState(config: AnalysisConfig): PipelineState {
  const cfg: Required<AnalysisConfig> = {
    sampleRateHz: config.sampleRateHz,
    bandLowHz: config.bandLowHz ?? 20,
    bandHighHz: config.bandHighHz ?? 4000,
  };
  const cond = createConditionState(cfg);
  const fsA = cond.outputRateHz;
  const frameSize = 2 ** Math.round(Math.log2(FRAME_S * fsA));
  const spec = createSpectrumState({ sampleRateHz: fsA, frameSize, hopSize: frameSize / 2 });
  const envM = Math.max(1, Math.round(fsA / ENVELOPE_RATE_HZ));
  const probe = createEnvelopeState({ sampleRateHz: fsA, decimation: envM, bandwidthHz: ENVELOPE_BANDWIDTH_HZ, wideBandwidthHz: ENVELOPE_WIDE_BANDWIDTH_HZ });
  const historyFrames = Math.ceil((HISTORY_S * fsA) / spec.hopSize) + 4;
  const frameRing: Float32Array[] = [];
  for (let i = 0; i < historyFrames; i++) frameRing.push(new Float32Array(spec.binCount));
  const envHistory = Math.ceil((HISTORY_S + 2) * probe.outputRateHz);
  return {
    cfg,
    cond,
    fsA,
    spec,
    loBin: Math.max(1, Math.floor(cond.bandLowHz / spec.binHz)),
    hiBin: Math.min(spec.binCount - 1, Math.ceil(cond.bandHighHz / spec.binHz)),
    peaks: createPeakList(32),
    tracker: createTrackerState(spec.binHz, 32),
    bgScratch: new Float64Array(2 * (BG_OUTER_BINS - BG_INNER_BINS + 1)),
    envM,
    envRateHz: probe.outputRateHz,
    envBandwidthHz: probe.bandwidthHz,
    envDelayS: probe.delayS,
    envScratch: new Float64Array(1024),
    envWideScratch: new Float64Array(1024),
    envPhaseScratch: new Float64Array(1024),
    rowEvery: Math.max(1, Math.round(probe.outputRateHz / ROW_RATE_HZ)),
    j: 0,
    jBase: 0,
    inBase: 0,
    ring: new Float32Array(Math.ceil(HISTORY_S * fsA)),
    ringStartJ: 0,
    envMs: new Float64Array(envHistory),
    envClip: new Uint8Array(envHistory),
    accMs: 0,
    accClip: 0,
    lastClipJ: -Infinity,
    frameRing,
    frameTimeS: new Float64Array(historyFrames),
    frameFloor: 0,
    alive: [],
    retired: [],
    aliveTones: [],
    rowG: 0,
    rowAfterGap: false,
    durationInputSamples: 0,
    markers: [],
    warnings: [],
    quietRing: new Float32Array(Math.ceil(QUIET_STORE_S * fsA)),
    quietStartJ: 0,
    quietOpen: true,
    noiseDriven: [],
    frames: [],
    liveOnsets: [],
    liveSegments: [],
    spectrumDbfs: new Float32Array(spec.binCount).fill(-200),
    hasSpectrum: false,
    sawFrame: false,
    isFinished: false,
  };
}

/**
 * Creates the streaming analysis (DESIGN.md stages 1-7). push(block) takes mono samples at
 * config.sampleRateHz (full scale ±1) in blocks of any length and returns what it added: track rows
 * (about 100 per second, lagging the input by about half a spectral frame), onsets as soon as they
 * are seen (time = where the tone last sat at the band background; the report's onset time comes
 * from the fitted growth curve), closed segments with a provisional rate (an exponential fit of
 * the segment's envelope, or a 'log-linear' slope when that fails; growth and decay of the noise
 * show as quiet), and the latest spectrum. gap(n) records n missing input samples (segments and
 * fits do not join across it; later times, and the report's durationS, include them, so durationS
 * = (samples pushed + samples signalled missing) / sampleRateHz); mark() adds a user marker
 * ('driving-off' fixes where a decay starts); finish() fits every segment again and returns the
 * report, whose figures are the final ones. Throws RangeError for a bad configuration; push()
 * after finish() throws.
 */
export function createAnalysis(config: AnalysisConfig): Analysis {
  const ps = createPipelineState(config);
  return {
    push: (block) => push(ps, block),
    gap: (missing) => gap(ps, missing),
    mark: (marker) => {
      ps.markers.push({ ...marker });
    },
    finish: () => finish(ps),
  };
}
