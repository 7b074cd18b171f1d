/**
 * Stage 2, spectral frames: fft.js against a direct DFT, the power normalisation (a bin-centred
 * sine of amplitude a gives a²; white noise gives 6σ²/N per bin with the Hann window), framing.
 */
import { describe, expect, it } from 'vitest';
import { computeSpectrumFrame, createSpectrumState, feedSpectrum, localFloorMean, type SpectrumState } from '../../dsp/spectrum';
import { createRng } from '../../dsp/synth';

function feedAll(st: SpectrumState, x: Float32Array, onFrame: () => void): void {
  let i = 0;
  while (i < x.length) {
    const k = Math.min(st.toFrame, x.length - i);
    if (feedSpectrum(st, x, i, i + k)) {
      computeSpectrumFrame(st);
      onFrame();
    }
    i += k;
  }
}

describe('spectral frames', () => {
  it('agrees with a direct DFT of the windowed frame (independent computation)', () => {
    const n = 256;
    const fs = 8000;
    const st = createSpectrumState({ sampleRateHz: fs, frameSize: n, hopSize: n });
    const rng = createRng(3);
    const x = new Float32Array(n);
    for (let i = 0; i < n; i++) x[i] = rng.normal();
    feedAll(st, x, () => undefined);
    expect(st.frameCount).toBe(1);
    let sumW = 0;
    for (let i = 0; i < n; i++) sumW += 0.5 - 0.5 * Math.cos((2 * Math.PI * i) / n);
    for (const k of [0, 1, 17, 64, 127, 128]) {
      let re = 0;
      let im = 0;
      for (let i = 0; i < n; i++) {
        const w = 0.5 - 0.5 * Math.cos((2 * Math.PI * i) / n);
        re += x[i] * w * Math.cos((2 * Math.PI * k * i) / n);
        im -= x[i] * w * Math.sin((2 * Math.PI * k * i) / n);
      }
      const p = ((re * re + im * im) * 4) / (sumW * sumW);
      expect(st.power[k]).toBeCloseTo(p, 9);
    }
  });

  it('gives a² in the bin of a bin-centred sine of amplitude a (Hann coherent gain 0.5, Harris 1978)', () => {
    const n = 1024;
    const fs = 8192;
    const st = createSpectrumState({ sampleRateHz: fs, frameSize: n, hopSize: n });
    const x = new Float32Array(n);
    for (let i = 0; i < n; i++) x[i] = 0.3 * Math.cos((2 * Math.PI * 100 * i) / n + 0.4);
    feedAll(st, x, () => undefined);
    expect(st.binHz).toBe(8);
    expect(st.power[100] / 0.09).toBeCloseTo(1, 6);
    // Periodic Hann: the neighbours hold (a/2)² each, the rest nothing.
    expect(st.power[101] / 0.09).toBeCloseTo(0.25, 6);
    expect(st.power[103]).toBeLessThan(1e-12);
  });

  it('gives 6σ²/N per bin for white noise (Hann noise bandwidth 1.5 bins, Harris 1978)', () => {
    const n = 512;
    const st = createSpectrumState({ sampleRateHz: 8000, frameSize: n, hopSize: n });
    const rng = createRng(9);
    const sigma = 0.1;
    const x = new Float32Array(n * 400);
    for (let i = 0; i < x.length; i++) x[i] = sigma * rng.normal();
    let acc = 0;
    let cnt = 0;
    feedAll(st, x, () => {
      for (let k = 10; k < 240; k++) {
        acc += st.power[k];
        cnt++;
      }
    });
    // 400 frames × 230 bins, each exponential: relative standard error 1/√92000 ≈ 0.3 %.
    expect(Math.abs(acc / cnt / ((6 * sigma * sigma) / n) - 1)).toBeLessThan(0.015);
  });

  it('frames every hop once the first frame has filled', () => {
    const st = createSpectrumState({ sampleRateHz: 8000, frameSize: 256, hopSize: 128 });
    const x = new Float32Array(256 + 128 * 10);
    let frames = 0;
    feedAll(st, x, () => frames++);
    expect(frames).toBe(11);
  });

  it('takes the lower side as the local floor, so a second tone on one side does not mask a peak', () => {
    const n = 1024;
    const st = createSpectrumState({ sampleRateHz: 8192, frameSize: n, hopSize: n, smoothing: 1 });
    const x = new Float32Array(n);
    const rng = createRng(2);
    for (let i = 0; i < n; i++) {
      x[i] = 0.001 * rng.normal() + 0.1 * Math.cos((2 * Math.PI * 100 * i) / n) + 0.1 * Math.cos((2 * Math.PI * 110 * i) / n);
    }
    feedAll(st, x, () => undefined);
    const floor = localFloorMean(st, 100, 4, 16, 1, 512);
    // Noise per bin 6σ²/N = 5.9e-9; the other tone 10 bins up sits in the upper side only.
    expect(floor).toBeLessThan(1e-7);
  });

  it('refuses a frame size that is not a power of two', () => {
    expect(() => createSpectrumState({ sampleRateHz: 8000, frameSize: 1000, hopSize: 500 })).toThrow(RangeError);
  });
});
