/**
 * The spectrum's transform (dsp/real-fft.ts) is fft.js's forward realTransform with the window
 * applied as it reads the frame: it must give fft.js's numbers on the windowed frame bit for bit
 * (reference library, fft.js 4.0.4) for every size, on noise, a sine, signed zeros and non-finite
 * samples. Its agreement with a direct DFT is checked in tests/dsp/spectrum.test.ts.
 */
import FFT from 'fft.js';
import { describe, expect, it } from 'vitest';
import { createRealFft, realFftWindowed } from '../../dsp/real-fft';
import { createRng } from '../../dsp/synth';

/** fft.js on the windowed copy and the fused transform on the ring at `base`; bins 0 .. N/2. */
function both(n: number, ring: Float64Array, base: number): [Float64Array, Float64Array] {
  const window = new Float64Array(n);
  for (let i = 0; i < n; i++) window[i] = 0.5 - 0.5 * Math.cos((2 * Math.PI * i) / n);
  const windowed = new Float64Array(n);
  for (let i = 0; i < n; i++) windowed[i] = ring[base + i] * window[i];
  const ref = new Float64Array(2 * n);
  new FFT(n).realTransform(ref, windowed);
  const out = new Float64Array(2 * n);
  realFftWindowed(createRealFft(n), out, ring, base, window);
  return [ref.subarray(0, n + 2), out.subarray(0, n + 2)];
}

/** Same bits, zeros' signs included (Object.is), for every value. */
function sameBits(a: Float64Array, b: Float64Array): boolean {
  for (let i = 0; i < a.length; i++) if (!Object.is(a[i], b[i])) return false;
  return true;
}

describe('windowed real FFT', () => {
  it('gives fft.js realTransform of the windowed frame bit for bit, sizes 4 to 16384 (reference library)', () => {
    const rng = createRng(17);
    for (let n = 4; n <= 16384; n *= 2) {
      const ring = new Float64Array(2 * n);
      for (let i = 0; i < ring.length; i++) ring[i] = rng.normal() * (i % 7 === 0 ? 1e-3 : 1);
      for (const base of [0, 1, n >> 1]) {
        const [ref, out] = both(n, ring, base);
        expect(sameBits(ref, out), `size ${n}, frame at ${base}`).toBe(true);
      }
    }
  });

  it('gives fft.js bit for bit on a sine, on signed zeros and on non-finite samples (reference library)', () => {
    const n = 256;
    const sine = new Float64Array(n);
    for (let i = 0; i < n; i++) sine[i] = Math.sin((2 * Math.PI * 17.3 * i) / n);
    const zeros = new Float64Array(n);
    for (let i = 0; i < n; i += 3) zeros[i] = -0;
    const bad = Float64Array.from(sine);
    bad[5] = Infinity;
    bad[77] = NaN;
    for (const x of [sine, zeros, bad]) {
      const [ref, out] = both(n, x, 0);
      expect(sameBits(ref, out)).toBe(true);
    }
  });

  it('rejects a size that is not a power of two', () => {
    expect(() => createRealFft(96)).toThrow(RangeError);
    expect(() => createRealFft(2)).toThrow(/size/);
  });
});
