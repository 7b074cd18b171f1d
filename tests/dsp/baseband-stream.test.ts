import { describe, expect, it } from 'vitest';
import { mixDownDecimate } from '../../dsp/baseband';
import { basebandOfWindow, createBasebandStream } from '../../dsp/baseband-stream';

/** A cos(2π f t + φ) sampled at fs, n samples. */
function tone(fs: number, n: number, f: number, a: number, phi: number): Float32Array {
  const x = new Float32Array(n);
  for (let i = 0; i < n; i++) x[i] = a * Math.cos((2 * Math.PI * f * i) / fs + phi);
  return x;
}

describe('baseband kept up to date as audio arrives (baseband-stream.ts)', () => {
  const fs = 8000;
  const centre = 170;
  const half = 24;

  it('a real tone mixes down to a phasor of half its amplitude turning at its offset from the centre', () => {
    // Complex demodulation (common practice): A cos(ωt + φ) = (A/2)(e^{i(ωt+φ)} + e^{−i(ωt+φ)}); mixed
    // down by the centre and low-passed, the phasor (A/2)e^{i(2π δ t + φ')} remains; the filter is
    // flat to ~1e-4 over the band (dsp/baseband.ts, Harris 1978).
    const a = 0.2;
    const delta = 3.5;
    const x = tone(fs, 30 * fs, centre + delta, a, 0.7);
    const windowLen = 12 * fs;
    const bs = createBasebandStream(fs, centre, half, 8, windowLen);
    // Audio in uneven pieces; each call sees the latest 12 s (less at first).
    let z = null;
    for (let end = 3001; ; end = Math.min(x.length, end + 7919)) {
      const x0 = Math.max(0, end - windowLen);
      z = basebandOfWindow(bs, x.subarray(x0, end), x0);
      if (end === x.length) break;
    }
    expect(z).not.toBeNull();
    if (z === null) return;
    expect(z.re.length).toBeGreaterThan(1000);
    let sr = 0;
    let si = 0;
    for (let t = 0; t < z.re.length; t++) {
      expect(Math.hypot(z.re[t], z.im[t])).toBeCloseTo(a / 2, 4);
      if (t + 1 < z.re.length) {
        sr += z.re[t] * z.re[t + 1] + z.im[t] * z.im[t + 1];
        si += z.re[t] * z.im[t + 1] - z.im[t] * z.re[t + 1];
      }
    }
    // The phasor turns at 2π δ per second.
    expect((Math.atan2(si, sr) * z.rateHz) / (2 * Math.PI)).toBeCloseTo(delta, 6);
  });

  it('gives mixDownDecimate’s outputs over the whole record since its origin, on the same grid', () => {
    // The stream's definition (its header): the one-pass mix-down of everything since the origin.
    let seed = 9;
    const rand = (): number => ((seed = (seed * 1664525 + 1013904223) >>> 0) / 4294967296) - 0.5;
    const x = new Float32Array(20 * fs);
    for (let i = 0; i < x.length; i++) x[i] = rand();
    const whole = mixDownDecimate(x, fs, centre, half, 8);
    const bs = createBasebandStream(fs, centre, half, 8, x.length);
    let z = basebandOfWindow(bs, x.subarray(0, 5 * fs + 17), 0);
    z = basebandOfWindow(bs, x.subarray(0, 11 * fs + 3), 0);
    z = basebandOfWindow(bs, x, 0);
    expect(z.re.length).toBe(whole.re.length);
    expect(z.startS).toBeCloseTo(whole.startS, 12);
    for (let j = 0; j < z.re.length; j++) {
      expect(Math.abs(z.re[j] - whole.re[j])).toBeLessThan(1e-12);
      expect(Math.abs(z.im[j] - whole.im[j])).toBeLessThan(1e-12);
    }
    // A window that moved on keeps only the outputs whose filter span lies inside it.
    const x0 = 7 * fs + 5;
    const w = basebandOfWindow(bs, x.subarray(x0), x0);
    const first = Math.ceil(x0 / bs.factor);
    expect(w.re.length).toBe(whole.re.length - first);
    expect(w.re[0]).toBe(z.re[first]);
    expect(w.startS).toBeCloseTo((first * bs.factor - x0 + (bs.taps - 1) / 2) / fs, 12);
  });
});
