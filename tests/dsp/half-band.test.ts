/**
 * The conditioning's decimation filters (dsp/half-band.ts): the half-band stage's length from
 * Kaiser's formula, its stop band against the design attenuation, and the DC blocker's gain.
 */
import { describe, expect, it } from 'vitest';
import { createDcBlocker, createHalfBandStage, dcStep, type HalfBandStage } from '../../dsp/half-band';

/** Zero-phase response of a half-band stage at f (Hz) for input rate fs: c0 + 2 Σ h_k cos(2π f k / fs), odd k. */
function response(stg: HalfBandStage, f: number, fs: number): number {
  const taps = stg.work.subarray(stg.work.length - stg.tapCount);
  let h = stg.centreTap;
  for (let j = 0; j < taps.length; j++) h += 2 * taps[j] * Math.cos((2 * Math.PI * f * (2 * j + 1)) / fs);
  return h;
}

describe('half-band stage', () => {
  it('has the length of Kaiser’s formula and meets 80 dB over its stop band (REFERENCES.md §96 worked example)', () => {
    const fs = 48000;
    const pass = 4400;
    const stg = createHalfBandStage(fs, pass, 64);
    // N = (80 − 7.95)/(2.285 · 2π · 15200/48000) = 15.85 → length 17 → half-band length 4K + 3 = 19.
    expect(stg.length).toBe(19);
    expect(stg.tapCount).toBe(5);
    let stop = 0;
    let ripple = 0;
    for (let i = 0; i <= 1000; i++) {
      stop = Math.max(stop, Math.abs(response(stg, fs / 2 - pass + (pass * i) / 1000, fs)));
      ripple = Math.max(ripple, Math.abs(response(stg, (pass * i) / 1000, fs) - 1));
    }
    expect(20 * Math.log10(stop)).toBeLessThan(-80);
    // Equal ripple in pass and stop band for a window design: |1 − H| below 1e−4 (0.001 dB).
    expect(ripple).toBeLessThan(1e-4);
    expect(response(stg, 0, fs)).toBeCloseTo(1, 14);
  });
});

describe('DC blocker', () => {
  it('passes the Nyquist frequency with gain exactly 1 and removes a constant', () => {
    // y = g(x − x1) + r·y1 with g = (1 + r)/2: H(−1) = 2g/(1 + r) = 1; H(1) = 0 (common practice).
    const dc = createDcBlocker(5, 12000);
    let x1 = 0;
    let y1 = 0;
    let last = 0;
    for (let n = 0; n < 24000; n++) {
      const x = n % 2 === 0 ? 1 : -1;
      y1 = dcStep(dc, x, x1, y1);
      x1 = x;
      last = y1;
    }
    expect(Math.abs(last)).toBeCloseTo(1, 9);
    x1 = 0;
    y1 = 0;
    for (let n = 0; n < 24000; n++) {
      y1 = dcStep(dc, 0.3, x1, y1);
      x1 = 0.3;
    }
    expect(Math.abs(y1)).toBeLessThan(1e-9);
  });
});
