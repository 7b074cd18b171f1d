/**
 * Complex baseband of a narrow band, for the noise-statistics estimators (damping.ts,
 * mode-statistics.ts, live-margin.ts): x is mixed down by a centre frequency and low-passed and
 * decimated in one pass by a Blackman-windowed-sinc FIR evaluated only at the output instants
 * (complex taps h[k]·e^{−iωk}), to about 8 × the band's half-width. The FIR is flat (ripple ~1e-4)
 * over the band and rejects everything that would alias into it by about 74 dB (Blackman window;
 * Harris 1978, Proc. IEEE 66(1)). Also the complex FFT of those estimators (fft.js, the one FFT of
 * the tree) and a DFT of any length over a band of bins (Bluestein).
 */
import FFT from 'fft.js';

/** Complex baseband after mixing and decimation. */
export interface Baseband {
  re: Float64Array;
  im: Float64Array;
  rateHz: number;
  /** Time of the first output sample, s, relative to the start of x. */
  startS: number;
}

/**
 * The low-pass of mixDownDecimate: Blackman-windowed sinc (Harris 1978) with unit DC gain (taps h
 * sum to 1), decimation factor and output rate ≈ rateMultiple × halfWidthHz (default 8), flat over
 * ±halfWidthHz.
 */
export function basebandFilter(sampleRateHz: number, halfWidthHz: number, rateMultiple = 8): { h: Float64Array; factor: number; rateHz: number } {
  const factor = Math.max(1, Math.floor(sampleRateHz / (rateMultiple * halfWidthHz)));
  const rateHz = sampleRateHz / factor;
  const transitionHz = rateHz - 2 * halfWidthHz;
  let taps = Math.ceil((6.6 * sampleRateHz) / transitionHz);
  if (taps % 2 === 0) taps++;
  const half = (taps - 1) / 2;
  const fc = rateHz / 2 / sampleRateHz;
  const h = new Float64Array(taps);
  let sum = 0;
  for (let k = 0; k < taps; k++) {
    const m = k - half;
    const sinc = m === 0 ? 2 * fc : Math.sin(2 * Math.PI * fc * m) / (Math.PI * m);
    const win = 0.42 - 0.5 * Math.cos((2 * Math.PI * k) / (taps - 1)) + 0.08 * Math.cos((4 * Math.PI * k) / (taps - 1));
    h[k] = sinc * win;
    sum += h[k];
  }
  for (let k = 0; k < taps; k++) h[k] /= sum;
  return { h, factor, rateHz };
}

/**
 * Mixes x down by centreHz, low-passes and decimates to a complex baseband whose flat band covers
 * ±halfWidthHz; output rate ≈ rateMultiple × halfWidthHz (default 8). Blackman-windowed sinc FIR
 * (Harris 1978), length chosen for a transition from halfWidthHz to (rate − halfWidthHz), unit gain
 * at centreHz.
 */
export function mixDownDecimate(x: Float32Array, sampleRateHz: number, centreHz: number, halfWidthHz: number, rateMultiple = 8): Baseband {
  const { h, factor, rateHz } = basebandFilter(sampleRateHz, halfWidthHz, rateMultiple);
  const taps = h.length;
  const half = (taps - 1) / 2;
  const hr = new Float64Array(taps);
  const hi = new Float64Array(taps);
  const w = (2 * Math.PI * centreHz) / sampleRateHz;
  for (let k = 0; k < taps; k++) {
    hr[k] = h[k] * Math.cos(w * k);
    hi[k] = -h[k] * Math.sin(w * k);
  }
  const count = x.length >= taps ? Math.floor((x.length - taps) / factor) + 1 : 0;
  const re = new Float64Array(count);
  const im = new Float64Array(count);
  // Four outputs per pass over the taps (each tap is loaded once for all four); every output keeps
  // its own sums in tap order, so the values are those of one output at a time.
  let j = 0;
  for (; j + 4 <= count; j += 4) {
    const n0 = j * factor;
    const n1 = n0 + factor;
    const n2 = n1 + factor;
    const n3 = n2 + factor;
    let ar0 = 0;
    let ai0 = 0;
    let ar1 = 0;
    let ai1 = 0;
    let ar2 = 0;
    let ai2 = 0;
    let ar3 = 0;
    let ai3 = 0;
    for (let k = 0; k < taps; k++) {
      const cr = hr[k];
      const ci = hi[k];
      const v0 = x[n0 + k];
      const v1 = x[n1 + k];
      const v2 = x[n2 + k];
      const v3 = x[n3 + k];
      ar0 += cr * v0;
      ai0 += ci * v0;
      ar1 += cr * v1;
      ai1 += ci * v1;
      ar2 += cr * v2;
      ai2 += ci * v2;
      ar3 += cr * v3;
      ai3 += ci * v3;
    }
    mixOut(re, im, j, ar0, ai0, w * n0);
    mixOut(re, im, j + 1, ar1, ai1, w * n1);
    mixOut(re, im, j + 2, ar2, ai2, w * n2);
    mixOut(re, im, j + 3, ar3, ai3, w * n3);
  }
  for (; j < count; j++) {
    const n0 = j * factor;
    let ar = 0;
    let ai = 0;
    for (let k = 0; k < taps; k++) {
      const v = x[n0 + k];
      ar += hr[k] * v;
      ai += hi[k] * v;
    }
    mixOut(re, im, j, ar, ai, w * n0);
  }
  return { re, im, rateHz, startS: half / sampleRateHz };
}

/** Output j: the filtered sum (ar, ai) turned by the mixer phase −phase at its first tap (float64: error ~ n0·w·1e-16 rad, negligible). */
function mixOut(re: Float64Array, im: Float64Array, j: number, ar: number, ai: number, phase: number): void {
  const ph = -phase;
  const c = Math.cos(ph);
  const s = Math.sin(ph);
  re[j] = ar * c - ai * s;
  im[j] = ar * s + ai * c;
}

/** fft.js plans by size, with their interleaved work arrays (sizes are powers of two: a few at most). */
const fftPlans = new Map<number, { fft: FFT; input: number[]; output: number[] }>();

/**
 * In-place complex FFT of a power-of-two length through fft.js (the real-input transform of real-fft.ts is derived from the same library);
 * inverse when sign = +1, unscaled (the caller divides by the length).
 */
export function fftInPlace(re: Float64Array, im: Float64Array, sign: -1 | 1): void {
  const n = re.length;
  if (n < 2) return;
  let plan = fftPlans.get(n);
  if (plan === undefined) {
    const fft = new FFT(n);
    plan = { fft, input: fft.createComplexArray() as number[], output: fft.createComplexArray() as number[] };
    fftPlans.set(n, plan);
  }
  const { input, output } = plan;
  for (let k = 0; k < n; k++) {
    input[2 * k] = re[k];
    input[2 * k + 1] = im[k];
  }
  // fft.js scales its inverse by 1/n; undo that to keep the unscaled contract.
  let scale = 1;
  if (sign < 0) plan.fft.transform(output, input);
  else {
    plan.fft.inverseTransform(output, input);
    scale = n;
  }
  for (let k = 0; k < n; k++) {
    re[k] = output[2 * k] * scale;
    im[k] = output[2 * k + 1] * scale;
  }
}

export function nextPow2(n: number): number {
  let m = 1;
  while (m < n) m <<= 1;
  return m;
}

/**
 * The DFT X[k] = Σ_t x[t]·e^{−2πikt/N} of a complex record of any length N, at the bins
 * k = −kMax … kMax only (returned in that order, index j ↔ k = j − kMax), by Bluestein's chirp-z
 * identity nk = (n² + k² − (k − n)²)/2 (Bluestein 1970, "A linear filtering approach to the
 * computation of the discrete Fourier transform", IEEE Trans. Audio Electroacoust. 18(4)) through
 * radix-2 FFTs. The chirp convolution needs only the lags k − t ∈ [−(N − 1) − kMax, kMax], so its
 * FFTs are nextPow2(N + 2·kMax) long rather than nextPow2(2N − 1) for all N bins.
 */
export function dftBand(re: Float64Array, im: Float64Array, kMax: number): { re: Float64Array; im: Float64Array } {
  const n = re.length;
  const reach = n - 1 + kMax;
  const m = nextPow2(reach + kMax + 1);
  // Chirp c[j] = e^{−iπj²/N} for |j| ≤ reach (even in j).
  const cr = new Float64Array(reach + 1);
  const ci = new Float64Array(reach + 1);
  const twoN = 2 * n;
  for (let j = 0; j <= reach; j++) {
    // j² mod 2N in exact integer arithmetic keeps the chirp phase accurate for long records.
    const r = (j * j) % twoN;
    const ang = (Math.PI * r) / n;
    cr[j] = Math.cos(ang);
    ci[j] = -Math.sin(ang);
  }
  const ar = new Float64Array(m);
  const ai = new Float64Array(m);
  for (let t = 0; t < n; t++) {
    ar[t] = re[t] * cr[t] - im[t] * ci[t];
    ai[t] = re[t] * ci[t] + im[t] * cr[t];
  }
  // conj(c) at every lag, lag d stored at d mod m (the lags span reach + kMax + 1 ≤ m: no overlap).
  const br = new Float64Array(m);
  const bi = new Float64Array(m);
  for (let d = -reach; d <= kMax; d++) {
    const a = d < 0 ? -d : d;
    const at = d < 0 ? d + m : d;
    br[at] = cr[a];
    bi[at] = -ci[a];
  }
  fftInPlace(ar, ai, -1);
  fftInPlace(br, bi, -1);
  for (let k = 0; k < m; k++) {
    const tr = ar[k] * br[k] - ai[k] * bi[k];
    ai[k] = ar[k] * bi[k] + ai[k] * br[k];
    ar[k] = tr;
  }
  fftInPlace(ar, ai, 1);
  const count = 2 * kMax + 1;
  const outR = new Float64Array(count);
  const outI = new Float64Array(count);
  for (let j = 0; j < count; j++) {
    const k = j - kMax;
    const at = k < 0 ? k + m : k;
    const a = k < 0 ? -k : k;
    const vr = ar[at] / m;
    const vi = ai[at] / m;
    outR[j] = vr * cr[a] - vi * ci[a];
    outI[j] = vr * ci[a] + vi * cr[a];
  }
  return { re: outR, im: outI };
}
