import { describe, expect, it } from 'vitest';
import { encodeWav } from '../../dsp/io/wav-write';
import { decodeAudioFile } from '../../web/capture/file-input';

// The app reads a pressure CSV as the command line does (dsp/io/csv.ts csvScaling): static
// pressure removed, an exact power-of-two scale, the printed decimals' resolution handed to the
// analysis as sampleBits, and levels in dB SPL (REFERENCES.md §11: 20·lg(p_rms / 20 µPa)).
function csvOf(values: number[], rateHz: number, digits: number): File {
  const lines = ['time_s,pressure_pa', ...values.map((v, i) => `${(i / rateHz).toFixed(6)},${v.toFixed(digits)}`)];
  return new File([lines.join('\n') + '\n'], 'sensor.csv');
}

describe('a pressure CSV opened in the app', () => {
  const rate = 2000;
  // A 1 Pa-amplitude 125 Hz tone on 101 325 Pa static pressure, printed with 3 decimals, 2 s.
  const values = Array.from({ length: 2 * rate }, (_, i) => 101_325 + Math.sin((2 * Math.PI * 125 * i) / rate));

  it('removes the static pressure and gives dB SPL: a 1 Pa amplitude tone is 90.97 dB SPL (RMS 0.7071 Pa)', async () => {
    const d = await decodeAudioFile(csvOf(values, rate, 3));
    const x = d.channels[0];
    let mean = 0;
    let peak = 0;
    for (const v of x) {
      mean += v / x.length;
      peak = Math.max(peak, Math.abs(v));
    }
    expect(Math.abs(mean)).toBeLessThan(1e-3);
    // Scaled to at most half full scale, at least a quarter (csvScaling).
    expect(peak).toBeGreaterThanOrEqual(0.25);
    expect(peak).toBeLessThanOrEqual(0.5);
    // Level of the tone: dBFS of its peak plus the offset is 20·lg(1/√2 / 20e-6) = 90.969 dB SPL.
    expect(d.splOffsetDb).toBeDefined();
    expect(20 * Math.log10(peak) + (d.splOffsetDb ?? 0)).toBeCloseTo(90.969, 1);
  });

  it('hands the analysis the resolution of the printed values: 1 mPa steps over a ±4 Pa full scale are 13 bits', async () => {
    const d = await decodeAudioFile(csvOf(values, rate, 3));
    // Excursion 1 Pa → scale 2^-2 (csvScaling puts it in [0.25, 0.5)), full scale 4 Pa; step 1e-3 Pa · 2^-2 over ±1: log2(2 / 2.5e-4) = 12.97 bits.
    expect(d.sampleBits).toBeCloseTo(Math.log2(2 / 2.5e-4), 6);
  });

  it('analyses values near 1e308 (finite doubles) instead of refusing them', async () => {
    const big = Array.from({ length: 2 * rate }, (_, i) => 1e308 * (0.5 + 0.4 * Math.sin((2 * Math.PI * 125 * i) / rate)));
    const lines = ['time_s,value', ...big.map((v, i) => `${(i / rate).toFixed(6)},${v.toExponential(6)}`)];
    const d = await decodeAudioFile(new File([lines.join('\n') + '\n'], 'huge.csv'), { csvUnit: 'other' });
    const x = d.channels[0];
    expect(x.every((v) => Number.isFinite(v) && Math.abs(v) <= 0.5)).toBe(true);
    expect(Math.max(...x)).toBeGreaterThan(0.25);
  });
});

describe('a WAV opened in the app', () => {
  it('hands the analysis its PCM resolution (16 bits) and none for float samples', async () => {
    const tone = new Float32Array(8000).map((_, i) => 0.5 * Math.sin((2 * Math.PI * 200 * i) / 8000));
    const pcm = await decodeAudioFile(new File([encodeWav(tone, 8000, 'pcm16') as Uint8Array<ArrayBuffer>], 'a.wav'));
    expect(pcm.sampleBits).toBe(16);
    const flt = await decodeAudioFile(new File([encodeWav(tone, 8000, 'float32') as Uint8Array<ArrayBuffer>], 'b.wav'));
    expect(flt.sampleBits).toBe(0);
  });
});
