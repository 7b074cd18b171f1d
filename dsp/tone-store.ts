/**
 * Envelope store of one tone (docs/DESIGN.md "Envelope store"): the tone's demodulator, its
 * regime, and every envelope sample since the tone was first tracked (narrow and wide band power,
 * phase, demodulation frequency, time, band background, regime state, clipping), with the readers
 * the fits use. The store grows by doubling; it is read, never rewritten, after finish().
 */
import { createEnvelopeState, type EnvelopeState } from './envelope';
import { createRegimeState, STATE_QUIET, type RegimeState } from './regime';
import { timeOfG, type TimeBase } from './time-base';
import { MAX_HARMONIC, type ToneTrack } from './track';
import type { EnvelopeSeries } from './types';

/** Envelope samples per second (about). */
export const ENVELOPE_RATE_HZ = 300;
/** Envelope low-pass noise bandwidth: the narrow band is about ±5 Hz around the tone. */
export const ENVELOPE_BANDWIDTH_HZ = 5;
/**
 * Wider envelope band for the fits, Hz: a ±5 Hz band blurs the envelope over ~20 ms, enough to
 * bend the knee of a fast rise into saturation; ±20 Hz blurs 4× less.
 */
export const ENVELOPE_WIDE_BANDWIDTH_HZ = 20;
/** Envelope samples this close to clipping are kept out of the fits, s. */
const CLIP_GUARD_S = 0.25;
/** Most envelope samples handed to one fit (longer steady stretches are block-averaged). */
const MAX_FIT_SAMPLES = 6000;
const INITIAL_CAPACITY = 4096;

/** One tracked tone with its envelope store and regime. */
export interface ToneRuntime {
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
  /** Peak envelope power once the record is finished (−1 until computed). */
  topPower: number;
  /** Peaks at the tone's k-th harmonic while it sounded: frames seen (by k), the last frequency (Hz, by k), and frames it sounded. */
  harmonicHits: Int32Array;
  harmonicHz: Float64Array;
  soundingFrames: number;
}

/** Caller-owned buffers that stepEnvelope writes (narrow power, wide power, phase). */
export interface EnvelopeScratch {
  power: Float64Array;
  wide: Float64Array;
  phase: Float64Array;
}

export function createEnvelopeScratch(size: number): EnvelopeScratch {
  return { power: new Float64Array(size), wide: new Float64Array(size), phase: new Float64Array(size) };
}

/** A demodulator of the analysis's envelope design at analysis rate rateHz, decimating by m. */
export function createToneEnvelope(rateHz: number, m: number): EnvelopeState {
  return createEnvelopeState({ sampleRateHz: rateHz, decimation: m, bandwidthHz: ENVELOPE_BANDWIDTH_HZ, wideBandwidthHz: ENVELOPE_WIDE_BANDWIDTH_HZ });
}

export function createToneRuntime(tone: ToneTrack, env: EnvelopeState, isSteadyLine: boolean, frameRingLength: number): ToneRuntime {
  const cap = INITIAL_CAPACITY;
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
    bgFrame: new Float64Array(frameRingLength),
    bgFrameFrom: 0,
    frameCursor: 0,
    isAlive: true,
    maxExcessDb: -Infinity,
    clipCountdown: 0,
    topPower: -1,
    harmonicHits: new Int32Array(MAX_HARMONIC + 1),
    harmonicHz: new Float64Array(MAX_HARMONIC + 1),
    soundingFrames: 0,
  };
}

function grown<T extends Float32Array | Float64Array | Uint8Array>(a: T, n: number, cap: number, make: (cap: number) => T): T {
  const b = make(cap);
  b.set(a.subarray(0, n));
  return b;
}

function growStore(tr: ToneRuntime, need: number): void {
  if (need <= tr.power.length) return;
  let cap = tr.power.length;
  while (cap < need) cap *= 2;
  const f32 = (c: number): Float32Array => new Float32Array(c);
  tr.power = grown(tr.power, tr.n, cap, f32);
  tr.powerWide = grown(tr.powerWide, tr.n, cap, f32);
  tr.phase = grown(tr.phase, tr.n, cap, f32);
  tr.demodHz = grown(tr.demodHz, tr.n, cap, f32);
  tr.timeS = grown(tr.timeS, tr.n, cap, (c) => new Float64Array(c));
  tr.bg = grown(tr.bg, tr.n, cap, f32);
  tr.state = grown(tr.state, tr.n, cap, (c) => new Uint8Array(c));
  tr.clipped = grown(tr.clipped, tr.n, cap, (c) => new Uint8Array(c));
}

/**
 * Appends `count` envelope outputs (in scratch) to a tone's store; gFirst is the global envelope
 * index of the first, clipRing the broadband clipping per envelope-clock sample (ring).
 */
export function appendEnvelope(tr: ToneRuntime, scratch: EnvelopeScratch, count: number, gFirst: number, tb: TimeBase, clipRing: Uint8Array): void {
  if (count === 0) return;
  if (tr.n === 0) tr.g0 = gFirst;
  growStore(tr, tr.n + count);
  const ringLen = clipRing.length;
  for (let q = 0; q < count; q++) {
    const g = gFirst + q;
    const k = tr.n++;
    tr.power[k] = scratch.power[q];
    tr.powerWide[k] = scratch.wide[q];
    tr.phase[k] = scratch.phase[q];
    tr.demodHz[k] = tr.env.freqHz;
    tr.timeS[k] = timeOfG(tb, g);
    // An output is affected by clipping while a clipped boxcar lies inside its kernel.
    if (clipRing[g % ringLen]) tr.clipCountdown = tr.env.kernelLength;
    tr.clipped[k] = tr.clipCountdown > 0 ? 1 : 0;
    if (tr.clipCountdown > 0) tr.clipCountdown--;
    tr.state[k] = STATE_QUIET;
  }
}

/** Builds the envelope series of store entries [i0, i1) of a tone, without clipped stretches. */
export function buildSeries(tr: ToneRuntime, i0: number, i1: number, isWide: boolean): EnvelopeSeries {
  const src = isWide ? tr.powerWide : tr.power;
  const times = tr.timeS;
  const keep = clipFreeMask(tr, i0, i1);
  let count = i1 - i0;
  if (keep !== null) {
    count = 0;
    for (let q = 0; q < keep.length; q++) count += keep[q];
  }
  // Neighbouring envelope samples are correlated over about 1/(2B): averaging blocks of up to a
  // quarter of that keeps at least 2 samples per correlation time (so N_eff = 2·B·D is unchanged)
  // and makes the fits several times faster. The fit's dispersion absorbs the smaller scatter.
  const bw = isWide ? tr.env.wideBandwidthHz : tr.env.bandwidthHz;
  const block = Math.max(1, Math.floor(tr.env.outputRateHz / (4 * bw)), Math.ceil(count / MAX_FIT_SAMPLES));
  const nOut = Math.ceil(count / block);
  const timeS = new Float64Array(nOut);
  const power = new Float64Array(nOut);
  // The ticks behind each mean, for models that must average over them (EnvelopeBlocks).
  const tickS = block > 1 ? new Float64Array(count) : null;
  const start = block > 1 ? new Int32Array(nOut + 1) : null;
  let o = 0;
  let acc = 0;
  let accT = 0;
  let inBlock = 0;
  let ticks = 0;
  for (let k = i0; k < i1; k++) {
    if (keep !== null && !keep[k - i0]) continue;
    acc += src[k];
    accT += times[k];
    if (tickS !== null) tickS[ticks++] = times[k];
    inBlock++;
    if (inBlock === block) {
      timeS[o] = accT / block;
      power[o] = acc / block;
      o++;
      if (start !== null) start[o] = ticks;
      acc = 0;
      accT = 0;
      inBlock = 0;
    }
  }
  if (inBlock > 0 && o < nOut) {
    timeS[o] = accT / inBlock;
    power[o] = acc / inBlock;
    o++;
    if (start !== null) start[o] = ticks;
  }
  const series: EnvelopeSeries = { timeS: timeS.subarray(0, o), power: power.subarray(0, o), bandwidthHz: bw };
  if (tickS !== null && start !== null) series.blocks = { tickS: tickS.subarray(0, ticks), start: start.subarray(0, o + 1) };
  return series;
}

/**
 * Which envelope samples of [i0, i1) lie more than CLIP_GUARD_S from any clipped one (1 = kept);
 * null when none is that close (every sample kept).
 */
function clipFreeMask(tr: ToneRuntime, i0: number, i1: number): Uint8Array | null {
  const guard = Math.round(CLIP_GUARD_S * tr.env.outputRateHz);
  const clipped = tr.clipped;
  const n = tr.n;
  let isAnyClip = false;
  for (let k = Math.max(0, i0 - guard); k < Math.min(n, i1 + guard) && !isAnyClip; k++) if (clipped[k]) isAnyClip = true;
  if (!isAnyClip) return null;
  const keep = new Uint8Array(Math.max(0, i1 - i0));
  let lastClip = -Infinity;
  for (let k = i0 - guard; k < i1 + guard; k++) {
    if (k >= 0 && k < n && clipped[k]) lastClip = k;
    // Forward pass marks samples within guard after a clip; the backward pass those before one.
    if (k >= i0 && k < i1) keep[k - i0] = k - lastClip > guard ? 1 : 0;
  }
  let nextClip = Infinity;
  for (let k = i1 + guard - 1; k >= i0; k--) {
    if (k < n && clipped[k]) nextClip = k;
    if (k < i1 && nextClip - k <= guard) keep[k - i0] = 0;
  }
  return keep;
}

/** First index ≥ lo of a contiguous run (no gap in time) ending at idx, stepping back at most maxBack entries. */
export function contiguousStart(tr: ToneRuntime, idx: number, maxBack: number, lo: number): number {
  const dt = 1.5 / tr.env.outputRateHz;
  let k = idx;
  const stop = Math.max(lo, idx - maxBack, 0);
  while (k > stop && tr.timeS[k] - tr.timeS[k - 1] <= dt) k--;
  return k;
}

/** End (exclusive, ≤ hi) of a contiguous run starting at idx, stepping forward at most maxFwd entries. */
export function contiguousEnd(tr: ToneRuntime, idx: number, maxFwd: number, hi: number): number {
  const dt = 1.5 / tr.env.outputRateHz;
  let k = idx;
  const stop = Math.min(hi, idx + maxFwd, tr.n);
  while (k + 1 < stop && tr.timeS[k + 1] - tr.timeS[k] <= dt) k++;
  return k + 1;
}

/** Mean envelope power over store entries [i0, i1) that are valid and not clipped; NaN when fewer than minCount. */
export function meanPower(tr: ToneRuntime, i0: number, i1: number, minCount: number, isWide = false): number {
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

/** Mean band background over store entries [i0, i1); NaN when none is known. */
export function meanBg(tr: ToneRuntime, i0: number, i1: number): number {
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

/** Store index of the first entry at or after time t, s (tr.n when none). */
export function indexAtTime(tr: ToneRuntime, t: number): number {
  let lo = 0;
  let hi = tr.n;
  while (lo < hi) {
    const mid = (lo + hi) >> 1;
    if (tr.timeS[mid] < t) lo = mid + 1;
    else hi = mid;
  }
  return lo;
}

/** Largest valid, unclipped envelope power over store entries [i0, i1). */
export function topPowerIn(tr: ToneRuntime, i0: number, i1: number): number {
  const k = topIndexIn(tr, i0, i1);
  return k < 0 ? 0 : tr.power[k];
}

/** Store index of the largest valid, unclipped envelope power in entries [i0, i1) (the first of equals); −1 when none is above 0. */
export function topIndexIn(tr: ToneRuntime, i0: number, i1: number): number {
  let top = 0;
  let at = -1;
  for (let k = Math.max(i0, tr.validFrom); k < i1; k++) {
    if (!tr.clipped[k] && tr.power[k] > top) {
      top = tr.power[k];
      at = k;
    }
  }
  return at;
}

/** Peak envelope power of a tone over its valid, unclipped samples (computed once, at finish). */
export function peakPower(tr: ToneRuntime): number {
  if (tr.topPower >= 0) return tr.topPower;
  tr.topPower = topPowerIn(tr, tr.validFrom, tr.n);
  return tr.topPower;
}
