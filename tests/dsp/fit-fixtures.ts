/**
 * Envelope-power series of known truth for the fit tests: y_k = |a(t_k)·e^{iφ} + n_k|², with n_k a
 * circular complex Gaussian AR(1) process of power N² whose one-sided noise-equivalent bandwidth is
 * `bandwidthHz` (what the pipeline's complex demodulator produces, DESIGN.md stage 4).
 * For AR(1) with coefficient ρ the autocorrelation sums to (1 + ρ)/(1 − ρ) samples, so
 * 2B = fe·(1 − ρ)/(1 + ρ), i.e. ρ = (fe − 2B)/(fe + 2B).
 */
import { createRng } from '../../dsp/synth';
import type { EnvelopeSeries } from '../../dsp/types';

export function envelopePowerSeries(p: {
  amplitude: (timeS: number) => number;
  noisePower: number;
  envelopeRateHz: number;
  bandwidthHz: number;
  startS: number;
  durationS: number;
  seed: number;
}): EnvelopeSeries {
  const n = Math.round(p.durationS * p.envelopeRateHz);
  const rng = createRng(p.seed);
  const rho = (p.envelopeRateHz - 2 * p.bandwidthHz) / (p.envelopeRateHz + 2 * p.bandwidthHz);
  const innov = Math.sqrt((1 - rho * rho) * p.noisePower / 2);
  const phase = 2 * Math.PI * rng.uniform();
  let nr = Math.sqrt(p.noisePower / 2) * rng.normal();
  let ni = Math.sqrt(p.noisePower / 2) * rng.normal();
  const timeS = new Float64Array(n);
  const power = new Float64Array(n);
  for (let k = 0; k < n; k++) {
    const t = p.startS + k / p.envelopeRateHz;
    nr = rho * nr + innov * rng.normal();
    ni = rho * ni + innov * rng.normal();
    const a = p.amplitude(t);
    const re = a * Math.cos(phase) + nr;
    const im = a * Math.sin(phase) + ni;
    timeS[k] = t;
    power[k] = re * re + im * im;
  }
  return { timeS, power, bandwidthHz: p.bandwidthHz };
}

/**
 * A tone demodulated in the test the way the pipeline does it (DESIGN.md stage 4): heterodyne at
 * the tone's frequency, a mean over blocks of fs/clockHz samples (the envelope clock), a
 * unit-gain Blackman FIR on that clock (Blackman & Tukey 1958: noise bandwidth 1.73 bins, so
 * about 1.7268·clock/(2B) taps for a one-sided bandwidth B), every `decimate`-th output kept
 * between startS and endS. Returns the mean-square envelope (scaled so a tone of amplitude A
 * gives A²), its one-sided noise bandwidth Σh²·clock/2, and the kernel for the fits.
 */
export function demodulatedSeries(p: {
  samples: Float32Array;
  sampleRateHz: number;
  toneHz: number;
  clockHz: number;
  bandwidthHz: number;
  decimate: number;
  startS: number;
  endS: number;
}): { series: EnvelopeSeries; kernel: { weights: Float64Array; spacingS: number } } {
  const fs = p.sampleRateHz;
  const m = Math.round(fs / p.clockHz);
  const clock = fs / m;
  const count = Math.floor(p.samples.length / m);
  const re = new Float64Array(count);
  const im = new Float64Array(count);
  for (let j = 0; j < count; j++) {
    let a = 0;
    let b = 0;
    for (let i = j * m; i < (j + 1) * m; i++) {
      const ph = (2 * Math.PI * p.toneHz * i) / fs;
      a += p.samples[i] * Math.cos(ph);
      b -= p.samples[i] * Math.sin(ph);
    }
    // Mean of x·e^{−iωt} is A/2 for a tone of amplitude A: scale by 2 so the power is A².
    re[j] = (2 * a) / m;
    im[j] = (2 * b) / m;
  }
  const len = Math.max(3, Math.round((1.7268 * clock) / (2 * p.bandwidthHz)) | 1);
  const h = new Float64Array(len);
  let sum = 0;
  for (let k = 0; k < len; k++) {
    const x = (2 * Math.PI * k) / (len - 1);
    h[k] = 0.42 - 0.5 * Math.cos(x) + 0.08 * Math.cos(2 * x);
    sum += h[k];
  }
  let sum2 = 0;
  for (let k = 0; k < len; k++) {
    h[k] /= sum;
    sum2 += h[k] * h[k];
  }
  const timeS: number[] = [];
  const power: number[] = [];
  for (let j = len - 1; j < count; j += p.decimate) {
    // Block j covers samples jm … (j + 1)m − 1; the FIR output is centred (len − 1)/2 blocks earlier.
    const t = ((j - (len - 1) / 2) * m + (m - 1) / 2) / fs;
    if (t < p.startS || t > p.endS) continue;
    let a = 0;
    let b = 0;
    for (let k = 0; k < len; k++) {
      a += h[k] * re[j - k];
      b += h[k] * im[j - k];
    }
    timeS.push(t);
    power.push(a * a + b * b);
  }
  return {
    series: { timeS: Float64Array.from(timeS), power: Float64Array.from(power), bandwidthHz: (clock * sum2) / 2 },
    kernel: { weights: h, spacingS: 1 / clock },
  };
}
