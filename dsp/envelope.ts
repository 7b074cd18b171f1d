/**
 * Stage 4, amplitude envelope by complex demodulation: the conditioned signal is multiplied by
 * 2·e^{−iφ(n)} (φ advancing at the tracked frequency), averaged over M samples (a boxcar that
 * also decimates to the envelope rate, its nulls on the aliases) and low-passed by a fourth-order
 * Butterworth filter (two biquads, bilinear transform: R. Bristow-Johnson, "Cookbook formulae for
 * audio EQ biquad filter coefficients"). For a cosine of amplitude a at the tracked frequency the
 * output z has |z| = a, so |z|² is the tone amplitude squared plus the band noise power.
 *
 * An exponential envelope e^{st} passes a linear filter as H(s)·e^{st}: the rate is untouched, only
 * the level is scaled, so a narrow band does not bias growth or decay rates (it smooths knees).
 */

/** Noise-equivalent bandwidth of an n-th order Butterworth low-pass over its cut-off: (π/2n)/sin(π/2n). */
export function butterworthEnbwRatio(order: number): number {
  const x = Math.PI / (2 * order);
  return x / Math.sin(x);
}

export interface EnvelopeConfig {
  /** Rate of the conditioned samples, Hz. */
  sampleRateHz: number;
  /** Input samples per envelope sample (boxcar length). */
  decimation: number;
  /** Butterworth cut-off, Hz (half the width of the analysed band around the tone). */
  cutoffHz: number;
}

export interface EnvelopeState {
  readonly sampleRateHz: number;
  readonly decimation: number;
  readonly outputRateHz: number;
  readonly cutoffHz: number;
  /** One-sided noise-equivalent bandwidth of the whole low-pass, Hz. */
  readonly bandwidthHz: number;
  /** Group delay at DC of boxcar + Butterworth, s (subtract from sample times). */
  readonly delayS: number;
  /** Envelope samples to discard after a reset while the filter settles. */
  readonly settleSamples: number;
  /** Biquad coefficients [b0, b1, b2, a1, a2] for the two sections. */
  coef: Float64Array;
  /** Filter memory: per section and channel (I, Q): x1, x2, y1, y2. */
  mem: Float64Array;
  /** Oscillator phasor and its per-sample rotation. */
  oscRe: number;
  oscIm: number;
  rotRe: number;
  rotIm: number;
  freqHz: number;
  accRe: number;
  accIm: number;
  /** Samples accumulated into the current boxcar. */
  phase: number;
  /** Envelope samples produced since the last reset. */
  produced: number;
}

function biquadLowPass(fc: number, fs: number, q: number, out: Float64Array, at: number): void {
  const w0 = (2 * Math.PI * fc) / fs;
  const alpha = Math.sin(w0) / (2 * q);
  const cw = Math.cos(w0);
  const a0 = 1 + alpha;
  out[at] = (1 - cw) / 2 / a0;
  out[at + 1] = (1 - cw) / a0;
  out[at + 2] = (1 - cw) / 2 / a0;
  out[at + 3] = (-2 * cw) / a0;
  out[at + 4] = (1 - alpha) / a0;
}

/** Creates a demodulator; throws RangeError for an unusable configuration. */
export function createEnvelopeState(cfg: EnvelopeConfig): EnvelopeState {
  const m = cfg.decimation;
  if (!Number.isInteger(m) || m < 1) throw new RangeError(`decimation must be a positive integer, got ${m}`);
  const outRate = cfg.sampleRateHz / m;
  if (!(cfg.cutoffHz > 0 && cfg.cutoffHz < 0.2 * outRate)) throw new RangeError(`cutoffHz must be in (0, ${0.2 * outRate}) Hz, got ${cfg.cutoffHz}`);
  const coef = new Float64Array(10);
  // Fourth-order Butterworth: section Q values 1/(2 cos(π/8)) and 1/(2 cos(3π/8)).
  const q1 = 1 / (2 * Math.cos(Math.PI / 8));
  const q2 = 1 / (2 * Math.cos((3 * Math.PI) / 8));
  biquadLowPass(cfg.cutoffHz, outRate, q1, coef, 0);
  biquadLowPass(cfg.cutoffHz, outRate, q2, coef, 5);
  const wc = 2 * Math.PI * cfg.cutoffHz;
  // DC group delay of a low-pass biquad is 1/(Q ω0); boxcar (M − 1)/2 input samples plus the half
  // sample of output timing (the output stands at the last input of the boxcar).
  const delayS = (1 / q1 + 1 / q2) / wc + (m - 1) / 2 / cfg.sampleRateHz;
  return {
    sampleRateHz: cfg.sampleRateHz,
    decimation: m,
    outputRateHz: outRate,
    cutoffHz: cfg.cutoffHz,
    bandwidthHz: cfg.cutoffHz * butterworthEnbwRatio(4),
    delayS,
    settleSamples: Math.ceil((2.0 / cfg.cutoffHz) * outRate),
    coef,
    mem: new Float64Array(16),
    oscRe: 1,
    oscIm: 0,
    rotRe: 1,
    rotIm: 0,
    freqHz: 0,
    accRe: 0,
    accIm: 0,
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
  st.mem.fill(0);
  st.accRe = 0;
  st.accIm = 0;
  st.oscRe = 1;
  st.oscIm = 0;
  st.phase = phase;
  st.produced = 0;
}

/**
 * Demodulates x[start .. end): writes |z|² of each completed envelope sample into out from outAt
 * on; returns the number written. Allocates nothing.
 */
export function stepEnvelope(st: EnvelopeState, x: Float32Array, start: number, end: number, out: Float64Array, outAt: number): number {
  const m = st.decimation;
  const c = st.coef;
  const mem = st.mem;
  let or = st.oscRe;
  let oi = st.oscIm;
  const rr = st.rotRe;
  const ri = st.rotIm;
  let ar = st.accRe;
  let ai = st.accIm;
  let ph = st.phase;
  let k = outAt;
  const inv = 2 / m;
  for (let i = start; i < end; i++) {
    const v = x[i];
    ar += v * or;
    ai += v * oi;
    const t = or * rr - oi * ri;
    oi = or * ri + oi * rr;
    or = t;
    if (++ph < m) continue;
    ph = 0;
    // Keep the phasor on the unit circle (rounding drift).
    const g = 1.5 - 0.5 * (or * or + oi * oi);
    or *= g;
    oi *= g;
    let re = ar * inv;
    let im = ai * inv;
    ar = 0;
    ai = 0;
    for (let s = 0; s < 2; s++) {
      const b0 = c[5 * s];
      const b1 = c[5 * s + 1];
      const b2 = c[5 * s + 2];
      const a1 = c[5 * s + 3];
      const a2 = c[5 * s + 4];
      const o = 8 * s;
      const yr = b0 * re + b1 * mem[o] + b2 * mem[o + 1] - a1 * mem[o + 2] - a2 * mem[o + 3];
      mem[o + 1] = mem[o];
      mem[o] = re;
      mem[o + 3] = mem[o + 2];
      mem[o + 2] = yr;
      const yi = b0 * im + b1 * mem[o + 4] + b2 * mem[o + 5] - a1 * mem[o + 6] - a2 * mem[o + 7];
      mem[o + 5] = mem[o + 4];
      mem[o + 4] = im;
      mem[o + 7] = mem[o + 6];
      mem[o + 6] = yi;
      re = yr;
      im = yi;
    }
    out[k++] = re * re + im * im;
  }
  st.oscRe = or;
  st.oscIm = oi;
  st.accRe = ar;
  st.accIm = ai;
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
