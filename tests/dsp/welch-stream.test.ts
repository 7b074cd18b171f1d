import { describe, expect, it } from 'vitest';
import { createWelchStream, welchOfWindow } from '../../dsp/welch-stream';

describe('Welch spectrum kept up to date as audio arrives (welch-stream.ts)', () => {
  const n = 1024;

  it('a tone on a bin centre has the power of the Hann coherent gain in each frame', () => {
    // Harris 1978 (Proc. IEEE 66(1), Table 1): the Hann window's coherent gain is 0.5, so a cosine of
    // amplitude A on bin k gives |X_k| = A·n/4 per frame (the other half of its power sits at −k).
    const a = 0.3;
    const k0 = 57;
    const x = new Float32Array(10 * n);
    for (let i = 0; i < x.length; i++) x[i] = a * Math.cos((2 * Math.PI * k0 * i) / n);
    const ws = createWelchStream(n, x.length);
    welchOfWindow(ws, x.subarray(0, 3 * n + 100), 0);
    const { sum, frames } = welchOfWindow(ws, x, 0);
    // Frames of n at a hop of n/2 inside 10 n samples: 19.
    expect(frames).toBe(19);
    expect(sum[k0] / frames).toBeCloseTo(((a * n) / 4) ** 2, 3);
    // Hann's spectrum of a bin-centred tone: the neighbour bins hold half the peak's amplitude (a quarter of its power), the bins beyond nothing (Harris 1978).
    expect(sum[k0 + 1] / sum[k0]).toBeCloseTo(0.25, 6);
    expect(sum[k0 + 3] / sum[k0]).toBeLessThan(1e-12);
  });

  it('forgets frames once the window has moved a block past them', () => {
    // The stream's own rule (its header): the average covers the window and at most one block more.
    const x = new Float32Array(200 * n);
    for (let i = 0; i < x.length; i++) x[i] = Math.cos((2 * Math.PI * (i < 100 * n ? 40 : 90) * i) / n);
    const windowLen = 40 * n;
    const ws = createWelchStream(n, windowLen);
    let framesSeen = 0;
    for (let end = 5 * n; end <= x.length; end += 7 * n) framesSeen = welchOfWindow(ws, x.subarray(Math.max(0, end - windowLen), end), Math.max(0, end - windowLen)).frames;
    const last = welchOfWindow(ws, x.subarray(x.length - windowLen), x.length - windowLen);
    expect(last.frames).toBeGreaterThanOrEqual(2 * (windowLen / n) - 1);
    expect(last.frames).toBeLessThanOrEqual(2 * (windowLen / n) - 1 + 16);
    // One frame of the old tone left in would stand at about 1/frames of the new one; only the float32 input's rounding is there.
    expect(last.sum[40] / last.sum[90]).toBeLessThan(1e-12);
    expect(framesSeen).toBeGreaterThan(0);
    expect(() => createWelchStream(1000, 10)).toThrow(/n must/);
  });
});
