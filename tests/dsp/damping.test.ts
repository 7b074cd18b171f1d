import { readFileSync } from 'node:fs';
import { describe, expect, it } from 'vitest';
import { dftBand, fftInPlace, mixDownDecimate } from '../../dsp/baseband';
import { estimateNoiseDrivenDamping, fitLorentzianWhittle, noiseDrivenMeanSquare } from '../../dsp/damping';
import { createRng, noiseDrivenMode, synthesize } from '../../dsp/synth';
import { expectedScalar, ref } from '../reference/values';

describe('building blocks', () => {
  it('Bluestein DFT of any length over a band of bins agrees with a direct DFT (independent agreement, fft.js habit)', () => {
    const rng = createRng(5);
    // Bands from the DC bin alone to wider than the record (bins then repeat with period n).
    for (const [n, kMax] of [[1, 0], [2, 1], [7, 3], [37, 4], [100, 12], [257, 32], [257, 128], [37, 40]]) {
      const re = Float64Array.from({ length: n }, () => rng.normal());
      const im = Float64Array.from({ length: n }, () => rng.normal());
      const got = dftBand(re, im, kMax);
      expect(got.re.length).toBe(2 * kMax + 1);
      for (let k = -kMax; k <= kMax; k++) {
        let sr = 0;
        let si = 0;
        for (let j = 0; j < n; j++) {
          const a = (-2 * Math.PI * ((((j * k) % n) + n) % n)) / n;
          sr += re[j] * Math.cos(a) - im[j] * Math.sin(a);
          si += re[j] * Math.sin(a) + im[j] * Math.cos(a);
        }
        // Rounding of O(n log n) float64 operations: 1e-9 of the sum's scale is ample.
        expect(Math.abs(got.re[k + kMax] - sr)).toBeLessThan(1e-9 * n);
        expect(Math.abs(got.im[k + kMax] - si)).toBeLessThan(1e-9 * n);
      }
    }
  });

  it('radix-2 FFT round trip returns the input', () => {
    const rng = createRng(6);
    const re = Float64Array.from({ length: 1024 }, () => rng.normal());
    const im = Float64Array.from({ length: 1024 }, () => rng.normal());
    const r2 = Float64Array.from(re);
    const i2 = Float64Array.from(im);
    fftInPlace(r2, i2, -1);
    fftInPlace(r2, i2, 1);
    for (let k = 0; k < 1024; k++) {
      expect(Math.abs(r2[k] / 1024 - re[k])).toBeLessThan(1e-12);
      expect(Math.abs(i2[k] / 1024 - im[k])).toBeLessThan(1e-12);
    }
  });

  it('mix-down is flat over the search band and rejects what would alias into it', () => {
    // A real tone of amplitude A becomes a baseband phasor of magnitude A/2.
    const fs = 8000;
    for (const offsetHz of [0, 7, -13, 20, -20]) {
      const x = synthesize({ sampleRateHz: fs, durationS: 2, tones: [{ frequencyHz: 170 + offsetHz, envelope: () => 1 }] });
      const z = mixDownDecimate(x, fs, 170, 20);
      const mid = Math.floor(z.re.length / 2);
      // Blackman-windowed sinc passband ripple is ~1e-4 (Harris 1978); allow 1e-3.
      expect(Math.abs(Math.hypot(z.re[mid], z.im[mid]) - 0.5)).toBeLessThan(1e-3);
    }
    const probe = synthesize({ sampleRateHz: fs, durationS: 2, tones: [{ frequencyHz: 170 + 8 * 20 - 20 + 5, envelope: () => 1 }] });
    const zp = mixDownDecimate(probe, fs, 170, 20);
    // First alias-prone frequency (rate − half-width) and beyond: Blackman stopband ≈ −74 dB; require −60 dB.
    expect(Math.hypot(zp.re[100], zp.im[100])).toBeLessThan(0.5e-3);
  });
});

describe('noise-driven mode statistics (REFERENCES.md §7)', () => {
  it('E[A²] = G/(2 ω0² α) (test vector 25)', () => {
    const v = noiseDrivenMeanSquare({ forcingIntensity: 1, frequencyHz: 170, decayRatePerS: 5 });
    expect(Math.abs(v - expectedScalar('v25_meanSquareAmplitude'))).toBeLessThanOrEqual(ref('v25_meanSquareAmplitude').tol);
  });
});

describe('estimateNoiseDrivenDamping', () => {
  it('α = 5 1/s recovered within ±1.0 from one 60 s record at 8 kHz by both estimators (test vector 26)', () => {
    const x = noiseDrivenMode({ sampleRateHz: 8000, durationS: 60, frequencyHz: 170, decayPerS: 5, rmsAmplitude: 0.05, seed: 2024 });
    const r = estimateNoiseDrivenDamping(x, 8000, { centreHz: 172 });
    const tol = ref('v26_noiseDrivenAlpha').tol;
    for (const est of [r.lorentzian, r.autocorrelation, r.combined]) {
      expect(est.isValid).toBe(true);
      expect(Math.abs(est.decayRatePerS - 5)).toBeLessThanOrEqual(tol);
      expect(est.ci95PerS[0]).toBeLessThan(est.decayRatePerS);
      expect(est.ci95PerS[1]).toBeGreaterThan(est.decayRatePerS);
    }
    expect(r.combined).toEqual(r.lorentzian);
    // Peak frequency: the Lorentzian centre is located to about √(γ/(πT)) ≈ 0.07 Hz here; allow 0.3 Hz.
    expect(Math.abs(r.frequencyHz - 170)).toBeLessThan(0.3);
  });

  it('95 % intervals cover the truth on 60 seeded 20 s records (2 kHz, mode in white noise)', () => {
    let coverL = 0;
    let coverA = 0;
    const trials = 60;
    const lor: number[] = [];
    for (let k = 0; k < trials; k++) {
      const x = noiseDrivenMode({ sampleRateHz: 2000, durationS: 20, frequencyHz: 170, decayPerS: 5, rmsAmplitude: 0.05, seed: 3000 + k });
      const rng = createRng(5000 + k);
      // Broadband noise at the same RMS as the mode: the floor is fitted, not ignored.
      for (let i = 0; i < x.length; i++) x[i] += 0.05 * rng.normal();
      const r = estimateNoiseDrivenDamping(x, 2000, { centreHz: 171, searchHalfWidthHz: 10 });
      lor.push(r.lorentzian.decayRatePerS);
      if (r.lorentzian.ci95PerS[0] <= 5 && 5 <= r.lorentzian.ci95PerS[1]) coverL++;
      if (r.autocorrelation.ci95PerS[0] <= 5 && 5 <= r.autocorrelation.ci95PerS[1]) coverA++;
    }
    // Binomial sd at 95 % and n = 60 is 2.8 %: accept 85 % (−3.6 sd) to 100 %.
    expect(coverL / trials).toBeGreaterThanOrEqual(0.85);
    expect(coverA / trials).toBeGreaterThanOrEqual(0.85);
    // Nearly unbiased (REFERENCES.md §7: +2 % at 10 s, −1 % at 30 s); sd ≈ √(α/T) = 0.5, so the mean of
    // 60 lies within ±0.25 (≈ 4 standard errors) of 5.
    const mean = lor.reduce((a, b) => a + b, 0) / trials;
    expect(Math.abs(mean - 5)).toBeLessThan(0.25);
  });

  it('Whittle fit agrees with an independent scipy fit of the same periodogram (tests/reference/cross_check.py)', () => {
    const c = JSON.parse(readFileSync(new URL('../reference/whittle-case.json', import.meta.url), 'utf8')) as {
      freqHz: number[];
      periodogram: number[];
      expected: { decayRatePerS: number; offsetHz: number };
    };
    const fit = fitLorentzianWhittle(Float64Array.from(c.freqHz), Float64Array.from(c.periodogram));
    // Both minimise the same likelihood; Nelder–Mead stops at xatol 1e-10 on ln γ: agree to 1e-6.
    expect(Math.abs(fit.estimate.decayRatePerS / c.expected.decayRatePerS - 1)).toBeLessThan(1e-6);
    expect(Math.abs(fit.offsetHz - c.expected.offsetHz)).toBeLessThan(1e-6);
  });

  it('refuses a search band outside the record and a record too short', () => {
    const x = new Float32Array(8000);
    expect(estimateNoiseDrivenDamping(x, 8000, { centreHz: 10 }).combined.reason).toMatch(/search band/);
    expect(estimateNoiseDrivenDamping(x, 8000, { centreHz: 3990 }).combined.reason).toMatch(/search band/);
    const short = estimateNoiseDrivenDamping(new Float32Array(400), 8000, { centreHz: 170 });
    expect(short.combined.isValid).toBe(false);
    expect(short.combined.reason).toMatch(/short/);
  });
});
