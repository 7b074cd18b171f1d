/**
 * Stage 1, input conditioning: anti-aliased decimation by a power of two to an analysis rate that
 * covers the band of interest, DC removal, and detection of unusable input on the raw samples:
 * clipping, and digital silence (runs of exact zeros: a recorder stopped or muted, a dropout, a
 * file padded with zeros), neither of which is a measurement of the sound.
 *
 * Decimation is a cascade of half-band FIR stages (each halves the rate; their design, Kaiser
 * 1974, and the DC blocker after them are in half-band.ts). Every filter runs sample by sample on
 * its own state, so the output does not depend on how the input is cut into blocks.
 */
import { createDcBlocker, createHalfBandStage, dcStep, resetHalfBandStage, runHalfBand, type DcBlocker, type HalfBandStage } from './half-band';

/** Largest block the conditioner takes in one step; longer input is fed in chunks by the caller. */
export const CONDITION_MAX_BLOCK = 8192;

/** |x| at or above this counts as full scale (−0.009 dBFS). */
export const CLIP_LEVEL = 0.999;
/** Consecutive full-scale samples that make a clipped stretch. */
export const CLIP_RUN_SAMPLES = 3;
/** Clipped stretches closer than this are merged into one span, s. */
const CLIP_MERGE_S = 0.05;
/** Most clipped spans kept (a warning says when more occurred); the same for spans of digital silence. */
export const CLIP_MAX_SPANS = 2048;
/**
 * Exact zeros lasting this long are digital silence, s. A converter with any analogue noise at
 * or above half a least significant bit gives a zero with probability under 0.7 per sample
 * (P(|n| < LSB/2) for Gaussian n of 0.5 LSB rms), so 10 ms of zeros (80 samples at 8 kHz) happens
 * by chance with probability below 0.7^80 ≈ 4e−13; below that noise there is nothing to measure.
 * Derivation; common practice for dropout detection.
 */
const DIGITAL_SILENCE_S = 0.01;

export interface ConditionConfig {
  sampleRateHz: number;
  bandLowHz: number;
  bandHighHz: number;
}

export interface ConditionState {
  readonly inputRateHz: number;
  readonly outputRateHz: number;
  /** Input samples per output sample (a power of two, 1 when the input rate is already low). */
  readonly decimation: number;
  /** Group delay of the decimation chain, s (linear phase, exact). */
  readonly delayS: number;
  /** Band actually analysed, Hz (the high edge may be lowered for low input rates). */
  readonly bandLowHz: number;
  readonly bandHighHz: number;
  stages: HalfBandStage[];
  /** The block as doubles when there is no decimation stage. */
  scratchA: Float64Array;
  clipScratch: Uint8Array;
  /** A copy of the input block and its bit patterns (the same memory), for the peak scan. */
  peakCopy: Float32Array;
  peakBits: Int32Array;
  /** DC blocker after the decimation (half-band.ts). */
  dc: DcBlocker;
  /** Outputs of the last step (valid up to outCount). */
  out: Float32Array;
  /** 1 where the input samples that fed this output held clipping or digital silence. */
  outUnusable: Uint8Array;
  outCount: number;
  /** Peak |x| of the last step's input. */
  peakAbs: number;
  isClipped: boolean;
  /** Input samples since the start or the latest gap (gaps excluded); keeps the decimation phase. */
  inputCount: number;
  /** Current run of full-scale samples. */
  clipRun: number;
  /** Current run of exact zeros, and the run length that makes digital silence. */
  zeroRun: number;
  readonly silenceRunSamples: number;
  /** Unusable input seen in the output window still being filled. */
  clipCarry: number;
  /** Clipped spans, in input sample time (s), with the time offset of gaps applied. */
  clips: SpanList;
  /** Spans of digital silence, likewise. */
  silences: SpanList;
  /** Offset added to input time by gaps, s. */
  timeOffsetS: number;
}

/** Stretches of input time, s, merged when closer than CLIP_MERGE_S; at most CLIP_MAX_SPANS kept. */
export interface SpanList {
  startS: Float64Array;
  endS: Float64Array;
  count: number;
  /** Stretches that did not fit the list. */
  dropped: number;
}

function createSpanList(): SpanList {
  return { startS: new Float64Array(CLIP_MAX_SPANS), endS: new Float64Array(CLIP_MAX_SPANS), count: 0, dropped: 0 };
}

/**
 * Sample rates the analysis accepts, Hz: from pressure-sensor logs at 500 Hz (a band up to 200 Hz,
 * 0.4 × the rate, holds the low modes of boilers and flues) to 192 kHz audio.
 */
export const MIN_SAMPLE_RATE_HZ = 500;
export const MAX_SAMPLE_RATE_HZ = 192000;

/**
 * Lowest band edge, Hz: the analysis frame (0.32 s, ~3 Hz bins) needs a tone several bins above
 * 0 Hz, and the DC blocker's corner (a quarter of the low edge) must stay above the drift it removes.
 */
export const MIN_BAND_LOW_HZ = 5;

/** Creates the conditioner; throws RangeError for an unusable rate or band. */
export function createConditionState(cfg: ConditionConfig): ConditionState {
  const fs = cfg.sampleRateHz;
  if (!Number.isFinite(fs) || fs < MIN_SAMPLE_RATE_HZ || fs > MAX_SAMPLE_RATE_HZ) {
    throw new RangeError(`sampleRateHz must be ${MIN_SAMPLE_RATE_HZ}-${MAX_SAMPLE_RATE_HZ} Hz, got ${fs}`);
  }
  if (!(cfg.bandLowHz >= MIN_BAND_LOW_HZ)) {
    throw new RangeError(`bandLowHz must be at least ${MIN_BAND_LOW_HZ} Hz (tones below it are not resolved by the analysis frame), got ${cfg.bandLowHz} Hz`);
  }
  if (!(cfg.bandLowHz > 0) || !(cfg.bandHighHz > cfg.bandLowHz)) {
    throw new RangeError(`band must satisfy 0 < bandLowHz < bandHighHz, got ${cfg.bandLowHz}-${cfg.bandHighHz} Hz`);
  }
  // The analysed band never reaches closer than 10 % to the Nyquist frequency of the input.
  const bandHighHz = Math.min(cfg.bandHighHz, 0.4 * fs);
  if (cfg.bandLowHz >= bandHighHz) throw new RangeError(`bandLowHz ${cfg.bandLowHz} Hz is above the usable band at ${fs} Hz`);
  // Largest power-of-two decimation keeping the output rate ≥ 2.5 × the band's top.
  let decimation = 1;
  while (fs / (decimation * 2) >= 2.5 * bandHighHz) decimation *= 2;
  const passHz = Math.min(1.1 * bandHighHz, 0.45 * (fs / decimation));
  const stages: HalfBandStage[] = [];
  let delayS = 0;
  let rate = fs;
  for (let d = decimation; d > 1; d /= 2) {
    const st = createHalfBandStage(rate, passHz, CONDITION_MAX_BLOCK);
    stages.push(st);
    delayS += (st.length - 1) / 2 / rate;
    rate /= 2;
  }
  const outRate = fs / decimation;
  const outCap = Math.ceil(CONDITION_MAX_BLOCK / decimation) + 2;
  const peakCopy = new Float32Array(CONDITION_MAX_BLOCK);
  return {
    inputRateHz: fs,
    outputRateHz: outRate,
    decimation,
    delayS,
    bandLowHz: cfg.bandLowHz,
    bandHighHz,
    stages,
    scratchA: new Float64Array(CONDITION_MAX_BLOCK),
    clipScratch: new Uint8Array(CONDITION_MAX_BLOCK),
    peakCopy,
    peakBits: new Int32Array(peakCopy.buffer),
    // Corner a quarter of the band's low edge: removes offset and drift, leaves the band flat.
    dc: createDcBlocker(cfg.bandLowHz / 4, outRate),
    out: new Float32Array(outCap),
    outUnusable: new Uint8Array(outCap),
    outCount: 0,
    peakAbs: 0,
    isClipped: false,
    inputCount: 0,
    clipRun: 0,
    zeroRun: 0,
    silenceRunSamples: Math.ceil(DIGITAL_SILENCE_S * fs),
    clipCarry: 0,
    clips: createSpanList(),
    silences: createSpanList(),
    timeOffsetS: 0,
  };
}

/** Extends the list's last span to timeS, or opens a span at runStartS. */
function recordSpanSample(list: SpanList, timeS: number, runStartS: number): void {
  const n = list.count;
  if (n > 0 && runStartS - list.endS[n - 1] <= CLIP_MERGE_S) {
    list.endS[n - 1] = timeS;
    return;
  }
  if (n >= CLIP_MAX_SPANS) {
    list.dropped++;
    return;
  }
  list.startS[n] = runStartS;
  list.endS[n] = timeS;
  list.count = n + 1;
}

/**
 * Marks the unusable samples of a block (slow path, only for blocks that reach full scale or hold
 * digital silence); zeroRun is the run of zeros before the block.
 */
function scanUnusable(st: ConditionState, block: Float32Array, zeroRun: number): void {
  const fs = st.inputRateHz;
  const n = block.length;
  const d = st.decimation;
  const clip = st.clipScratch;
  let phase = st.inputCount % d;
  let m = 0;
  let flag = 0;
  for (let i = 0; i < n; i++) {
    const x = block[i];
    const ax = x < 0 ? -x : x;
    if (ax >= CLIP_LEVEL || !(ax <= 1e30)) {
      st.clipRun++;
      if (st.clipRun >= CLIP_RUN_SAMPLES) {
        const tS = (st.inputCount + i) / fs + st.timeOffsetS;
        recordSpanSample(st.clips, tS, tS - (st.clipRun - 1) / fs);
        st.isClipped = true;
        flag = 1;
      }
    } else st.clipRun = 0;
    zeroRun = x === 0 ? zeroRun + 1 : 0;
    if (zeroRun >= st.silenceRunSamples) {
      const tS = (st.inputCount + i) / fs + st.timeOffsetS;
      recordSpanSample(st.silences, tS, tS - (zeroRun - 1) / fs);
      flag = 1;
    }
    if (++phase === d) {
      clip[m++] = flag | st.clipCarry;
      st.clipCarry = 0;
      flag = 0;
      phase = 0;
    }
  }
  st.clipCarry |= flag;
}

/** Longest run of exact zeros in a[off .. off + n), the first run continuing zeroRunBefore zeros before it. */
function longestZeroRun(a: Float64Array, off: number, n: number, zeroRunBefore: number): number {
  let run = zeroRunBefore;
  let longest = run;
  for (let i = off; i < off + n; i++) {
    run = a[i] === 0 ? run + 1 : 0;
    if (run > longest) longest = run;
  }
  return longest;
}

/**
 * Largest |x| of the block (NaN when it holds a NaN, as Math.max gives), from the bit patterns:
 * an IEEE 754 single with its sign bit cleared orders as an integer exactly as |x| does, with
 * infinity above every finite value and the NaN patterns above infinity. Integer maxima are
 * cheaper than Math.max on doubles (which must carry NaN and order −0 below +0); four running
 * maxima so that each waits on its own previous value only.
 */
function blockPeakAbs(st: ConditionState, block: Float32Array): number {
  const n = block.length;
  const bits = st.peakBits;
  st.peakCopy.set(block);
  let p0 = 0;
  let p1 = 0;
  let p2 = 0;
  let p3 = 0;
  let i = 0;
  for (; i + 3 < n; i += 4) {
    p0 = Math.max(p0, bits[i] & 0x7fffffff);
    p1 = Math.max(p1, bits[i + 1] & 0x7fffffff);
    p2 = Math.max(p2, bits[i + 2] & 0x7fffffff);
    p3 = Math.max(p3, bits[i + 3] & 0x7fffffff);
  }
  for (; i < n; i++) p0 = Math.max(p0, bits[i] & 0x7fffffff);
  bits[0] = Math.max(Math.max(p0, p1), Math.max(p2, p3));
  return st.peakCopy[0];
}

/**
 * Conditions one block (length ≤ CONDITION_MAX_BLOCK): writes the analysis-rate samples into
 * st.out[0 .. st.outCount) and their unusable flags into st.outUnusable. Allocates nothing.
 */
export function stepCondition(st: ConditionState, block: Float32Array): void {
  const n = block.length;
  // The first half-band stage reads its input straight from its work buffer.
  const first = st.stages.length > 0 ? st.stages[0] : null;
  const a = first !== null ? first.work : st.scratchA;
  const off = first !== null ? first.length - 1 : 0;
  a.set(block, off);
  let peak = blockPeakAbs(st, block);
  const nonFinite = peak !== peak;
  if (nonFinite) {
    peak = 0;
    for (let i = 0; i < n; i++) if (Math.abs(block[i]) > peak) peak = Math.abs(block[i]);
  }
  const zeroRunBefore = st.zeroRun;
  const silenceRun = st.silenceRunSamples;
  let leading = 0;
  while (leading < n && a[off + leading] === 0) leading++;
  // A run of silenceRun zeros inside the block holds one of the samples silenceRun − 1, 2·silenceRun − 1, …
  let maySilence = zeroRunBefore + leading >= silenceRun;
  for (let i = off + silenceRun - 1; i < off + n && !maySilence; i += silenceRun) if (a[i] === 0) maySilence = true;
  let trailing = 0;
  while (trailing < n && a[off + n - 1 - trailing] === 0) trailing++;
  st.zeroRun = leading === n ? zeroRunBefore + n : trailing;
  st.peakAbs = peak;
  st.isClipped = false;
  const mayClip = peak >= CLIP_LEVEL || nonFinite || (maySilence && longestZeroRun(a, off, n, zeroRunBefore) >= silenceRun);
  if (mayClip) {
    // Non-finite samples are replaced by 0 so the filters stay finite (they count as clipped).
    for (let i = off; i < off + n; i++) if (!(Math.abs(a[i]) <= 1e30)) a[i] = 0;
    scanUnusable(st, block, zeroRunBefore);
  } else st.clipRun = 0;
  const carryBefore = st.clipCarry;

  // Each stage reads its input from its own work buffer, where the stage before wrote it; the
  // last one writes st.out through the DC blocker.
  let len = n;
  const stages = st.stages;
  for (let s = 0; s < stages.length; s++) len = runHalfBand(stages[s], len, s + 1 < stages.length ? stages[s + 1] : null, st.dc, st.out);
  const outUnusable = st.outUnusable;
  if (stages.length === 0) {
    // No decimation: the DC blocker alone, on the block in scratchA.
    const out = st.out;
    const dc = st.dc;
    let x1 = dc.x1;
    let y1 = dc.y1;
    for (let i = 0; i < len; i++) {
      const x = a[i];
      y1 = dcStep(dc, x, x1, y1);
      x1 = x;
      out[i] = y1;
    }
    dc.x1 = x1;
    dc.y1 = y1;
  }
  if (mayClip) for (let i = 0; i < len; i++) outUnusable[i] = st.clipScratch[i];
  else {
    outUnusable.fill(0, 0, len);
    // An unusable input still pending in an unfinished output window marks that output.
    if (carryBefore && len > 0) {
      outUnusable[0] = 1;
      st.clipCarry = 0;
    }
  }
  st.outCount = len;
  st.inputCount += n;
}

/** Restarts the filters after missing input (a gap of missingSamples input samples). */
export function gapCondition(st: ConditionState, missingSamples: number): void {
  for (const stg of st.stages) resetHalfBandStage(stg);
  st.clipCarry = 0;
  // Clip times continue from the restart: the decimation phase starts afresh after the gap.
  st.timeOffsetS += (st.inputCount + missingSamples) / st.inputRateHz;
  st.inputCount = 0;
  st.dc.x1 = 0;
  st.dc.y1 = 0;
  st.clipRun = 0;
  st.zeroRun = 0;
}
