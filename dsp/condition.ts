/**
 * Stage 1, input conditioning: anti-aliased decimation by a power of two to an analysis rate that
 * covers the band of interest, DC removal, and detection of unusable input on the raw samples:
 * clipping, and digital silence (runs of exact zeros: a recorder stopped or muted, a dropout, a
 * file padded with zeros), neither of which is a measurement of the sound.
 *
 * Decimation is a cascade of half-band FIR stages (each halves the rate). Each stage is a
 * Kaiser-windowed sinc whose transition band runs from the top of the band of interest to the
 * image of that edge, so nothing aliases into the band (Kaiser 1974, "Nonrecursive digital filter
 * design using the I0-sinh window function"; half-band structure: every second tap is zero).
 * Every filter runs sample by sample on its own state, so the output does not depend on how the
 * input is cut into blocks.
 */

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

/** Stop-band attenuation of each half-band stage, dB. */
const STOPBAND_DB = 80;

export interface ConditionConfig {
  sampleRateHz: number;
  bandLowHz: number;
  bandHighHz: number;
}

interface HalfBandStage {
  /** Number of non-zero odd offsets k = 1, 3, 5, ... from the centre (symmetric taps). */
  tapCount: number;
  centreTap: number;
  length: number;
  /**
   * Linear work buffer: the last length − 1 inputs, then the current block; its last tapCount
   * values hold the coefficients of the odd offsets, so that the filter's inner loop reads one
   * typed array rather than two (V8 checks each array it reads on every pass of the loop; one
   * array is about 6 % less time for the whole conditioning).
   */
  work: Float64Array;
  /** Parity of the inputs seen: an output is produced on every second input. */
  parity: number;
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
  /**
   * DC blocker: y = g·(x − x1) + r·y1 (dcStep). The gain g = (1 + r)/2 makes its response exactly
   * 1 at Nyquist and flat within 0.001 dB across the band (without it the pass band rises by up
   * to (1 − r)/2).
   */
  dcR: number;
  dcGain: number;
  dcX1: number;
  dcY1: number;
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

/** Zeroth-order modified Bessel function of the first kind, power series (for the Kaiser window). */
function besselI0(x: number): number {
  let sum = 1;
  let term = 1;
  const q = (x * x) / 4;
  for (let k = 1; k < 60; k++) {
    term *= q / (k * k);
    sum += term;
    if (term < 1e-17 * sum) break;
  }
  return sum;
}

/**
 * Designs one half-band low-pass stage (cut-off at a quarter of its input rate) whose pass band
 * reaches passHz at input rate rateHz. Length from Kaiser's formula N = (A − 7.95)/(2.285 Δω).
 */
function createHalfBandStage(rateHz: number, passHz: number): HalfBandStage {
  const transition = (rateHz / 2 - 2 * passHz) / rateHz;
  if (!(transition > 0)) throw new RangeError(`bandHighHz too close to the analysis Nyquist frequency (${passHz} Hz at ${rateHz} Hz)`);
  const estimate = Math.ceil((STOPBAND_DB - 7.95) / (2.285 * 2 * Math.PI * transition)) + 1;
  // Half-band length 4K + 3: the outermost taps sit at odd offsets and are non-zero.
  const k = Math.max(0, Math.ceil((estimate - 3) / 4));
  const length = 4 * k + 3;
  const half = (length - 1) / 2;
  const beta = 0.1102 * (STOPBAND_DB - 8.7);
  const i0b = besselI0(beta);
  const oddTaps = new Float64Array((half + 1) / 2);
  let sum = 0.5;
  for (let j = 0; j < oddTaps.length; j++) {
    const off = 2 * j + 1;
    const r = off / half;
    const w = besselI0(beta * Math.sqrt(1 - r * r)) / i0b;
    const h = (Math.sin((Math.PI * off) / 2) / (Math.PI * off)) * w;
    oddTaps[j] = h;
    sum += 2 * h;
  }
  // Unit gain at DC.
  for (let j = 0; j < oddTaps.length; j++) oddTaps[j] /= sum;
  const work = new Float64Array(length - 1 + CONDITION_MAX_BLOCK + oddTaps.length);
  work.set(oddTaps, work.length - oddTaps.length);
  return { tapCount: oddTaps.length, centreTap: 0.5 / sum, length, work, parity: 0 };
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
    const st = createHalfBandStage(rate, passHz);
    stages.push(st);
    delayS += (st.length - 1) / 2 / rate;
    rate /= 2;
  }
  const outRate = fs / decimation;
  const outCap = Math.ceil(CONDITION_MAX_BLOCK / decimation) + 2;
  // DC blocker corner a quarter of the band's low edge: removes offset and drift, leaves the band flat.
  const dcR = Math.exp((-2 * Math.PI * (cfg.bandLowHz / 4)) / outRate);
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
    dcR,
    dcGain: 0.5 * (1 + dcR),
    dcX1: 0,
    dcY1: 0,
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

/** One output of the DC blocker (ConditionState.dcR): input x after x1, previous output y1. */
function dcStep(st: ConditionState, x: number, x1: number, y1: number): number {
  return st.dcGain * (x - x1) + st.dcR * y1;
}

/**
 * Runs one half-band stage over the n inputs already in its work buffer (after the history) into
 * the next stage's work buffer (after its history); returns the number of outputs. The last stage
 * (next null) hands its outputs to the DC blocker in the same pass and writes st.out: the
 * blocker's recursion, which waits on its previous output, then overlaps the filter's sums
 * instead of running alone after them.
 */
function runHalfBand(st: ConditionState, stg: HalfBandStage, n: number, next: HalfBandStage | null): number {
  const L = stg.length;
  const w = stg.work;
  const hist = L - 1;
  const nt = stg.tapCount;
  const tapsAt = w.length - nt;
  const c0 = stg.centreTap;
  const h = (L - 1) / 2;
  const dst = next !== null ? next.work : null;
  const dstAt = next !== null ? next.length - 1 : 0;
  let m = dstAt;
  const out = st.out;
  let x1 = st.dcX1;
  let y1 = st.dcY1;
  // Input i completes a pair when the running count is odd; its window is w[i .. i + L − 1].
  // Each output folds the mirrored samples first (symmetric taps) and sums its terms in tap order.
  let i = stg.parity === 1 ? 0 : 1;
  // Four outputs per pass (windows two inputs apart) share the loop over the taps. Tap j of output
  // r (centre c + 2r) reads L_{j−r} = w[c − 1 − 2(j − r)] and R_{j+r} = w[c + 1 + 2(j + r)]; the
  // four left and four right samples slide by one per tap, so each tap loads two new samples.
  for (; i + 6 < n; i += 8) {
    const centre = i + h;
    let a0 = c0 * w[centre];
    let a1 = c0 * w[centre + 2];
    let a2 = c0 * w[centre + 4];
    let a3 = c0 * w[centre + 6];
    let l1 = w[centre + 1];
    let l2 = w[centre + 3];
    let l3 = w[centre + 5];
    let r0 = l1;
    let r1 = l2;
    let r2 = l3;
    let lo = centre - 1;
    let hi = centre + 7;
    for (let j = 0; j < nt; j++) {
      const t = w[tapsAt + j];
      const l0 = w[lo];
      const r3 = w[hi];
      a0 += t * (l0 + r0);
      a1 += t * (l1 + r1);
      a2 += t * (l2 + r2);
      a3 += t * (l3 + r3);
      l3 = l2;
      l2 = l1;
      l1 = l0;
      r0 = r1;
      r1 = r2;
      r2 = r3;
      lo -= 2;
      hi += 2;
    }
    if (dst !== null) {
      dst[m++] = a0;
      dst[m++] = a1;
      dst[m++] = a2;
      dst[m++] = a3;
    } else {
      const d0 = dcStep(st, a0, x1, y1);
      const d1 = dcStep(st, a1, a0, d0);
      const d2 = dcStep(st, a2, a1, d1);
      const d3 = dcStep(st, a3, a2, d2);
      out[m++] = d0;
      out[m++] = d1;
      out[m++] = d2;
      out[m++] = d3;
      x1 = a3;
      y1 = d3;
    }
  }
  for (; i < n; i += 2) {
    const centre = i + h;
    let acc = c0 * w[centre];
    let lo = centre - 1;
    let hi = centre + 1;
    for (let j = 0; j < nt; j++) {
      acc += w[tapsAt + j] * (w[lo] + w[hi]);
      lo -= 2;
      hi += 2;
    }
    if (dst !== null) dst[m++] = acc;
    else {
      y1 = dcStep(st, acc, x1, y1);
      x1 = acc;
      out[m++] = y1;
    }
  }
  if (dst === null) {
    st.dcX1 = x1;
    st.dcY1 = y1;
  }
  stg.parity = (stg.parity + n) & 1;
  w.copyWithin(0, n, n + hist);
  return m - dstAt;
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
  for (let s = 0; s < stages.length; s++) len = runHalfBand(st, stages[s], len, s + 1 < stages.length ? stages[s + 1] : null);
  const outUnusable = st.outUnusable;
  if (stages.length === 0) {
    // No decimation: the DC blocker alone, on the block in scratchA.
    const out = st.out;
    let x1 = st.dcX1;
    let y1 = st.dcY1;
    for (let i = 0; i < len; i++) {
      const x = a[i];
      y1 = dcStep(st, x, x1, y1);
      x1 = x;
      out[i] = y1;
    }
    st.dcX1 = x1;
    st.dcY1 = y1;
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
  for (const stg of st.stages) {
    stg.work.fill(0, 0, stg.work.length - stg.tapCount);
    stg.parity = 0;
  }
  st.clipCarry = 0;
  // Clip times continue from the restart: the decimation phase starts afresh after the gap.
  st.timeOffsetS += (st.inputCount + missingSamples) / st.inputRateHz;
  st.inputCount = 0;
  st.dcX1 = 0;
  st.dcY1 = 0;
  st.clipRun = 0;
  st.zeroRun = 0;
}
