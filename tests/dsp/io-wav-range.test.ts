// WAV float samples at the edges of double precision: finite samples whose channel sum overflows
// are mixed without overflow; values past the 32-bit range are named as such, not as "infinite".
// Layout: WAVE format tag 3 (IEEE float), 64-bit, little-endian (Microsoft RIFF/WAVE, 1991).
import { describe, expect, it } from 'vitest';
import { InputError } from '../../dsp/io/errors';
import { decodeWav } from '../../dsp/io/wav';

function float64Wav(frames: number[][], rateHz = 8000): Uint8Array {
  const nc = frames[0].length;
  const data = frames.length * nc * 8;
  const b = new Uint8Array(44 + data);
  const v = new DataView(b.buffer);
  const put = (o: number, s: string): void => [...s].forEach((c, i) => (b[o + i] = c.charCodeAt(0)));
  put(0, 'RIFF');
  v.setUint32(4, 36 + data, true);
  put(8, 'WAVEfmt ');
  v.setUint32(16, 16, true);
  v.setUint16(20, 3, true);
  v.setUint16(22, nc, true);
  v.setUint32(24, rateHz, true);
  v.setUint32(28, rateHz * nc * 8, true);
  v.setUint16(32, nc * 8, true);
  v.setUint16(34, 64, true);
  put(36, 'data');
  v.setUint32(40, data, true);
  frames.forEach((fr, i) => fr.forEach((x, c) => v.setFloat64(44 + (i * nc + c) * 8, x, true)));
  return b;
}

function problem(f: () => unknown): InputError {
  try {
    f();
  } catch (e) {
    if (e instanceof InputError) return e;
    throw e;
  }
  throw new Error('no error');
}

describe('float64 WAV near the largest double', () => {
  it('two channels of ±1e308 mix to their mean without overflowing the sum', () => {
    const frames = Array.from({ length: 8000 }, (_, i) => (i === 0 ? [1e308, -1e308] : [0.25 * Math.sin(i), 0.25 * Math.sin(i)]));
    const { samples } = decodeWav(float64Wav(frames));
    expect(samples[0]).toBe(0);
    expect(samples[1]).toBeCloseTo(0.25 * Math.sin(1), 6);
  });

  it('a finite value past the 32-bit range is named as such (exit 7), not "infinite"', () => {
    const frames = Array.from({ length: 8000 }, (_, i) => (i === 1 ? [1e300] : [0.25 * Math.sin(i)]));
    const e = problem(() => decodeWav(float64Wav(frames)));
    expect(e.problem).toBe('bad-samples');
    expect(e.message).toMatch(/sample 1 .* is 1\.00e\+300, beyond the range of 32-bit samples/);
    expect(e.message).not.toMatch(/infinite/);
  });
});
