/**
 * Stage 4, amplitude envelope by complex demodulation: the conditioned signal is multiplied by
 * 2·e^{−iφ(n)} (φ advancing at the tracked frequency), averaged with triangular weights over 2M
 * samples while decimating by M (two boxcars in cascade: response sinc², nulls on every alias of
 * the envelope rate, so the image at 2f cannot fold into the band) and low-passed by a
 * Blackman-window FIR (Blackman & Tukey 1958; Harris 1978, "On the use of windows for harmonic
 * analysis with the DFT", Proc. IEEE 66(1): sidelobes −58 dB, noise bandwidth 1.73 bins). For a
 * cosine of amplitude a at the tracked frequency the output z has |z| = a, so |z|² is the tone
 * amplitude squared plus the band noise power.
 *
 * Why a FIR: an exponential e^{st} passes any linear filter as H(s)·e^{st} once the filter's
 * transient has gone. A recursive low-pass of a few hertz has poles decaying at only ~10 1/s, so
 * its transient after a kink (driving switched off) would outlast a fast decay and bias the
 * fitted rate; the FIR's transient ends exactly one kernel length after the kink, and its linear
 * phase delays every component equally (the delay is subtracted from the sample times).
 */

export interface EnvelopeConfig {
  /** Rate of the conditioned samples, Hz. */
  sampleRateHz: number;
  /** Input samples per envelope sample (boxcar length). */
  decimation: number;
  /** Target one-sided noise bandwidth of the low-pass, Hz (half the width of the band around the tone). */
  bandwidthHz: number;
  /**
   * Noise bandwidth of a second, wider output on the same samples (Hz, > bandwidthHz): it blurs
   * knees of the envelope less (for fits) at the price of more noise and less rejection of
   * neighbouring tones. Its kernel sits centred in the narrow one, so both share one delay.
   */
  wideBandwidthHz: number;
}

export interface EnvelopeState {
  readonly sampleRateHz: number;
  readonly decimation: number;
  readonly outputRateHz: number;
  /** One-sided noise-equivalent bandwidth of the whole low-pass, Hz (as designed). */
  readonly bandwidthHz: number;
  /** Kernel length in envelope samples, and in seconds: the transient after any kink. */
  readonly kernelLength: number;
  readonly kernelS: number;
  /** Delay of boxcar + FIR (linear phase), s (subtract from sample times). */
  readonly delayS: number;
  /** Envelope samples to discard after a reset while the filter fills. */
  readonly settleSamples: number;
  kernel: Float64Array;
  /** Wide kernel, its length, offset into the narrow window, and its noise bandwidth (Hz). */
  wideKernel: Float64Array;
  wideLength: number;
  wideOffset: number;
  readonly wideBandwidthHz: number;
  /**
   * Boxcar outputs (I and Q), oldest first: the last kernelLength − 1 already filtered, then those
   * waiting for the low-pass (at most ENVELOPE_BATCH).
   */
  histRe: Float64Array;
  histIm: Float64Array;
  /** Boxcar outputs held in histRe/histIm. */
  filled: number;
  /** Kernel sums of four outputs (re, im pairs), scratch of the low-pass. */
  sums: Float64Array;
  /** Oscillator phasor and its per-sample rotation. */
  oscRe: number;
  oscIm: number;
  rotRe: number;
  rotIm: number;
  freqHz: number;
  /** Descending-weight sums of the current block and ascending-weight sums carried to the next output. */
  accRe: number;
  accIm: number;
  ascRe: number;
  ascIm: number;
  prevAscRe: number;
  prevAscIm: number;
  /** Samples accumulated into the current boxcar. */
  phase: number;
  /** Envelope samples produced since the last reset. */
  produced: number;
}

/** Unit-gain Blackman window of odd length whose one-sided noise bandwidth is about bandwidthHz (two-sided ≈ 1.727·rate/L). */
function blackmanKernel(rateHz: number, bandwidthHz: number): Float64Array {
  const len = Math.max(3, Math.round((1.7268 * rateHz) / (2 * bandwidthHz)) | 1);
  const kernel = new Float64Array(len);
  let sum = 0;
  for (let k = 0; k < len; k++) {
    const x = (2 * Math.PI * (k + 1)) / (len + 1);
    kernel[k] = 0.42 - 0.5 * Math.cos(x) + 0.08 * Math.cos(2 * x);
    sum += kernel[k];
  }
  for (let k = 0; k < len; k++) kernel[k] /= sum;
  return kernel;
}

/** Creates a demodulator; throws RangeError for an unusable configuration. */
export function createEnvelopeState(cfg: EnvelopeConfig): EnvelopeState {
  const m = cfg.decimation;
  if (!Number.isInteger(m) || m < 1) throw new RangeError(`decimation must be a positive integer, got ${m}`);
  const outRate = cfg.sampleRateHz / m;
  if (!(cfg.bandwidthHz > 0 && cfg.bandwidthHz < 0.1 * outRate)) throw new RangeError(`bandwidthHz must be in (0, ${0.1 * outRate}) Hz, got ${cfg.bandwidthHz}`);
  if (!(cfg.wideBandwidthHz > cfg.bandwidthHz)) throw new RangeError(`wideBandwidthHz must exceed bandwidthHz, got ${cfg.wideBandwidthHz}`);
  const kernel = blackmanKernel(outRate, cfg.bandwidthHz);
  const len = kernel.length;
  const wide = blackmanKernel(outRate, cfg.wideBandwidthHz);
  let sum2 = 0;
  for (let k = 0; k < len; k++) sum2 += kernel[k] * kernel[k];
  let wide2 = 0;
  for (let k = 0; k < wide.length; k++) wide2 += wide[k] * wide[k];
  return {
    wideKernel: wide,
    wideLength: wide.length,
    wideOffset: (len - wide.length) / 2,
    wideBandwidthHz: (outRate * wide2) / 2,
    sampleRateHz: cfg.sampleRateHz,
    decimation: m,
    outputRateHz: outRate,
    bandwidthHz: (outRate * sum2) / 2,
    kernelLength: len,
    kernelS: len / outRate,
    // Triangle centred M samples before its last input; FIR centred (L − 1)/2 outputs back.
    delayS: (len - 1) / 2 / outRate + m / cfg.sampleRateHz,
    settleSamples: len + 2,
    kernel,
    histRe: new Float64Array(len - 1 + ENVELOPE_BATCH),
    histIm: new Float64Array(len - 1 + ENVELOPE_BATCH),
    filled: len - 1,
    sums: new Float64Array(8),
    oscRe: 1,
    oscIm: 0,
    rotRe: 1,
    rotIm: 0,
    freqHz: 0,
    accRe: 0,
    accIm: 0,
    ascRe: 0,
    ascIm: 0,
    prevAscRe: 0,
    prevAscIm: 0,
    phase: 0,
    produced: 0,
  };
}

/** Sets the demodulation frequency (Hz); the phase runs on continuously. */
export function setEnvelopeFrequency(st: EnvelopeState, freqHz: number): void {
  const w = (2 * Math.PI * freqHz) / st.sampleRateHz;
  st.freqHz = freqHz;
  st.rotRe = Math.cos(w);
  st.rotIm = -Math.sin(w);
}

/**
 * Clears the filters; `phase` is the position of the next input within the boxcar (0..M−1), so
 * envelope samples stay on a common clock across demodulators started at different times.
 */
export function resetEnvelope(st: EnvelopeState, phase: number): void {
  st.histRe.fill(0);
  st.histIm.fill(0);
  st.filled = st.kernelLength - 1;
  st.accRe = 0;
  st.accIm = 0;
  st.ascRe = 0;
  st.ascIm = 0;
  st.prevAscRe = 0;
  st.prevAscIm = 0;
  st.oscRe = 1;
  st.oscIm = 0;
  st.phase = phase;
  st.produced = 0;
}

/**
 * Boxcar outputs low-passed together (at most this many wait): the sums of neighbouring envelope
 * samples are independent, so four at a time keep the processor busy where one sum would wait on
 * its previous addition.
 */
const ENVELOPE_BATCH = 64;

/**
 * Kernel sums of four neighbouring outputs: acc[2r], acc[2r + 1] = Σ_q kernel[q] · (re, im)[j + r + q],
 * r = 0..3, each over the taps in order.
 */
function kernelSumsOfFour(kernel: Float64Array, n: number, re: Float64Array, im: Float64Array, j: number, acc: Float64Array): void {
  let re0 = 0;
  let im0 = 0;
  let re1 = 0;
  let im1 = 0;
  let re2 = 0;
  let im2 = 0;
  let re3 = 0;
  let im3 = 0;
  for (let q = 0; q < n; q++) {
    const c = kernel[q];
    const at = j + q;
    re0 += c * re[at];
    im0 += c * im[at];
    re1 += c * re[at + 1];
    im1 += c * im[at + 1];
    re2 += c * re[at + 2];
    im2 += c * im[at + 2];
    re3 += c * re[at + 3];
    im3 += c * im[at + 3];
  }
  acc[0] = re0;
  acc[1] = im0;
  acc[2] = re1;
  acc[3] = im1;
  acc[4] = re2;
  acc[5] = im2;
  acc[6] = re3;
  acc[7] = im3;
}

/**
 * Low-passes the boxcar outputs waiting in the history: writes |z|² and arg z of the narrow band
 * and |z|² of the wide band of each into the outputs from k on, keeps the last kernelLength − 1
 * boxcar outputs; returns the next k. Every sum runs over the taps in order, as one at a time would.
 */
function lowPassBatch(st: EnvelopeState, out: Float64Array, outWide: Float64Array, outPhase: Float64Array, k: number): number {
  const h = st.kernel;
  const len = st.kernelLength;
  const hw = st.wideKernel;
  const lw = st.wideLength;
  const ow = st.wideOffset;
  const hr = st.histRe;
  const hi = st.histIm;
  const acc = st.sums;
  const filled = st.filled;
  if (filled < len) return k;
  // Output e low-passes history[e .. e + len − 1].
  let e = 0;
  for (; e + 3 + len <= filled; e += 4) {
    kernelSumsOfFour(h, len, hr, hi, e, acc);
    for (let r = 0; r < 4; r++) {
      out[k + r] = acc[2 * r] * acc[2 * r] + acc[2 * r + 1] * acc[2 * r + 1];
      outPhase[k + r] = Math.atan2(acc[2 * r + 1], acc[2 * r]);
    }
    kernelSumsOfFour(hw, lw, hr, hi, e + ow, acc);
    for (let r = 0; r < 4; r++) outWide[k + r] = acc[2 * r] * acc[2 * r] + acc[2 * r + 1] * acc[2 * r + 1];
    k += 4;
  }
  for (; e + len <= filled; e++) {
    let re = 0;
    let im = 0;
    for (let q = 0; q < len; q++) {
      re += h[q] * hr[e + q];
      im += h[q] * hi[e + q];
    }
    let wr = 0;
    let wi = 0;
    for (let q = 0; q < lw; q++) {
      wr += hw[q] * hr[e + ow + q];
      wi += hw[q] * hi[e + ow + q];
    }
    out[k] = re * re + im * im;
    outPhase[k] = Math.atan2(im, re);
    outWide[k] = wr * wr + wi * wi;
    k++;
  }
  hr.copyWithin(0, filled - len + 1, filled);
  hi.copyWithin(0, filled - len + 1, filled);
  st.filled = len - 1;
  return k;
}

/**
 * Demodulates x[start .. end): writes |z|² of each completed envelope sample into out (narrow
 * band) and outWide (wide band), and arg z of the narrow band (rad) into outPhase, from outAt on;
 * returns the number written. While the demodulation frequency stays fixed, arg z advances at
 * 2π (f_tone − f_demod) per second. Allocates nothing.
 */
export function stepEnvelope(
  st: EnvelopeState,
  x: Float32Array,
  start: number,
  end: number,
  out: Float64Array,
  outWide: Float64Array,
  outPhase: Float64Array,
  outAt: number,
): number {
  const m = st.decimation;
  const hr = st.histRe;
  const hi = st.histIm;
  let or = st.oscRe;
  let oi = st.oscIm;
  const rr = st.rotRe;
  const ri = st.rotIm;
  let ar = st.accRe;
  let ai = st.accIm;
  let br = st.ascRe;
  let bi = st.ascIm;
  let ph = st.phase;
  let k = outAt;
  // Triangle weights sum to M²; the factor 2 restores the amplitude of a cosine.
  const inv = 2 / (m * m);
  // Boxcar by boxcar: the inner loop runs to the end of the boxcar or of the input, no branch.
  let i = start;
  while (i < end) {
    const stop = Math.min(end, i + (m - ph));
    for (; i < stop; i++) {
      const v = x[i];
      const vr = v * or;
      const vi = v * oi;
      // Sample q of the block: weight M − 1 − q in the output closing after this block, q + 1 in the next.
      const wd = m - 1 - ph;
      const wa = ph + 1;
      ar += vr * wd;
      ai += vi * wd;
      br += vr * wa;
      bi += vi * wa;
      const t = or * rr - oi * ri;
      oi = or * ri + oi * rr;
      or = t;
      ph++;
    }
    if (ph < m) break;
    ph = 0;
    // Keep the phasor on the unit circle (rounding drift).
    const g = 1.5 - 0.5 * (or * or + oi * oi);
    or *= g;
    oi *= g;
    const zr = (st.prevAscRe + ar) * inv;
    const zi = (st.prevAscIm + ai) * inv;
    st.prevAscRe = br;
    st.prevAscIm = bi;
    ar = 0;
    ai = 0;
    br = 0;
    bi = 0;
    hr[st.filled] = zr;
    hi[st.filled] = zi;
    if (++st.filled === hr.length) k = lowPassBatch(st, out, outWide, outPhase, k);
  }
  k = lowPassBatch(st, out, outWide, outPhase, k);
  st.oscRe = or;
  st.oscIm = oi;
  st.accRe = ar;
  st.accIm = ai;
  st.ascRe = br;
  st.ascIm = bi;
  st.phase = ph;
  st.produced += k - outAt;
  return k - outAt;
}

/**
 * Band noise power of the envelope for white noise whose averaged spectrum (spectrum.ts
 * normalisation, Hann window) has mean power perBinPower per bin: E|z|² = 2·(4σ²/fs)·B with
 * perBinPower = 6σ²/N, i.e. perBinPower · (4/3) · B / binHz.
 */
export function bandPowerFromBinPower(perBinPower: number, bandwidthHz: number, binHz: number): number {
  return (perBinPower * (4 / 3) * bandwidthHz) / binHz;
}
