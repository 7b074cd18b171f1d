// Short-frame sequential onset detector (dsp/live-onset.ts): Page's CUSUM on the likelihood ratio
// of each bin's power against its running background, with the threshold from the false-alarm
// rate (Lorden's bound, REFERENCES.md §30, §45; its statistics are checked in
// live-onset-statistics.test.ts), and a growth confirmed only when the rise goes on for longer
// than the short kernel. Truth: synthetic signals of known onset and
// rate (dsp/synth.ts); the no-onset cases are the ones named in DESIGN.md (toneless noise with
// ±10 dB steps, mains hum with harmonics switched on, knocks ringing down).
import { describe, expect, it } from 'vitest';
import { createLiveOnsetState, stepLiveOnset } from '../../dsp/live-onset';
import { createRng, humCycleEnvelope, synthesize } from '../../dsp/synth';

const FS = 8000;

function detect(x: Float32Array, block = 256): { timeS: number; freqHz: number; atS: number }[] {
  const st = createLiveOnsetState({ sampleRateHz: FS, bandLowHz: 20, bandHighHz: 3500 });
  const out: { timeS: number; freqHz: number; atS: number }[] = [];
  for (let i = 0; i < x.length; i += block) {
    const end = Math.min(x.length, i + block);
    stepLiveOnset(st, x, i, end);
    for (let q = 0; q < st.onsetCount; q++) out.push({ timeS: st.onsetJ[q] / FS, freqHz: st.onsetFreqHz[q], atS: end / FS });
  }
  return out;
}

describe('live onset detector', () => {
  it('names the bad parameter', () => {
    expect(() => createLiveOnsetState({ sampleRateHz: 0, bandLowHz: 20, bandHighHz: 1000 })).toThrow(/sampleRateHz/);
    expect(() => createLiveOnsetState({ sampleRateHz: FS, bandLowHz: 500, bandHighHz: 100 })).toThrow(/bandLowHz/);
  });

  it('announces a growth at 10 and 30 1/s from a faint tone once, at its frequency, within 4 e-folds of the 6 dB point', () => {
    // 4 e-folds: the short frame's bins are 62.5 Hz wide, so the tone stands 10 dB less over its
    // bin's noise than over a 10 Hz band; the bench (section 2a) measures the whole analysis.
    const rng = createRng(5);
    for (const rate of [10, 30]) {
      for (const freq of [140 + 300 * rng.uniform(), 500 + 400 * rng.uniform()]) {
        const noiseRms = 10 ** (-50 / 20);
        const bandPower = (noiseRms * noiseRms * 10) / (FS / 2);
        const a6 = Math.sqrt(8 * bandPower);
        const onsetS = 2.5;
        const t6 = onsetS + Math.log(100) / rate;
        const env = humCycleEnvelope({ onsetS, startAmplitude: a6 / 100, growthPerS: rate, limitAmplitude: 0.3, offS: 20, decayPerS: 5 });
        const x = synthesize({ sampleRateHz: FS, durationS: t6 + 2, tones: [{ frequencyHz: freq, envelope: env }], noiseRms, seed: Math.round(freq) });
        const found = detect(x);
        expect(found.length, `${rate} 1/s at ${freq.toFixed(0)} Hz`).toBe(1);
        expect(Math.abs(found[0].freqHz - freq)).toBeLessThanOrEqual(FS / 128);
        expect((found[0].atS - t6) * rate, `${rate} 1/s at ${freq.toFixed(0)} Hz`).toBeLessThan(4);
        // The change point lies before the announcement and after the tone started.
        expect(found[0].timeS).toBeLessThan(found[0].atS);
        expect(found[0].timeS).toBeGreaterThan(onsetS);
      }
    }
  });

  it('announces a tone that enters 40 dB over the noise of its bin and then grows, during its growth; the same tone entering at its limit is a step', () => {
    // A hum set off by a firing burst: the tone appears well above the noise (a step, never an
    // onset by itself) and grows at 7 1/s from there into its limit 0.66 s later. Truth: the
    // synthetic envelope (dsp/synth.ts humCycleEnvelope), onset at 2.5 s; the record ends while
    // the tone holds.
    const rng = createRng(17);
    for (const freq of [120, 171.3, 200 + 600 * rng.uniform()]) {
      const tone = (startAmplitude: number): Float32Array => {
        const env = humCycleEnvelope({ onsetS: 2.5, startAmplitude, growthPerS: 7, limitAmplitude: 0.4, offS: 10, decayPerS: 4.5 });
        return synthesize({ sampleRateHz: FS, durationS: 5.5, tones: [{ frequencyHz: freq, envelope: env }], noiseRms: 0.0004, seed: Math.round(freq) });
      };
      const found = detect(tone(0.004));
      expect(found.length, `${freq.toFixed(1)} Hz`).toBe(1);
      expect(Math.abs(found[0].freqHz - freq)).toBeLessThanOrEqual(FS / 128);
      // Announced while it grows: it reaches its limit at 2.5 + ln(100)/7 = 3.16 s.
      expect(found[0].atS, `${freq.toFixed(1)} Hz`).toBeLessThan(2.5 + Math.log(100) / 7);
      expect(found[0].timeS).toBeGreaterThanOrEqual(2.5);
      expect(detect(tone(0.4)), `${freq.toFixed(1)} Hz`).toEqual([]);
    }
  });

  it('announces a loud hum cycle once: its die-away is no onset anywhere in the band', () => {
    // A tone 90 dB over the noise of a bin spreads through the short Hann frame over much of the
    // band (REFERENCES.md §97); as it dies away, that spread must not read as rising power in
    // other bins. Truth: the synthetic envelope (dsp/synth.ts humCycleEnvelope), onset at 2.5 s.
    const rng = createRng(23);
    for (let k = 0; k < 16; k++) {
      const freq = 60 + 1600 * rng.uniform();
      const env = humCycleEnvelope({ onsetS: 2.5, startAmplitude: k % 2 === 0 ? 0.004 : 0.0001, growthPerS: 5 + 40 * rng.uniform(), limitAmplitude: 0.4, offS: 5.5, decayPerS: 3 + 10 * rng.uniform() });
      const x = synthesize({ sampleRateHz: FS, durationS: 9, tones: [{ frequencyHz: freq, envelope: env }], noiseRms: 0.0004, seed: 300 + k });
      const found = detect(x);
      expect(found.map((o) => o.freqHz), `${freq.toFixed(1)} Hz`).toHaveLength(1);
      expect(Math.abs(found[0].freqHz - freq), `${freq.toFixed(1)} Hz`).toBeLessThanOrEqual(FS / 128);
      expect(found[0].timeS).toBeGreaterThanOrEqual(2.5);
    }
  });

  it('announces nothing on 60 s of toneless noise with ±10 dB steps', () => {
    const rng = createRng(42);
    const x = new Float32Array(60 * FS);
    let g = 0;
    let next = 0;
    for (let i = 0; i < x.length; i++) {
      if (i >= next) {
        if (next > 0) g += g >= 10 ? -10 : g <= -10 ? 10 : rng.uniform() < 0.5 ? -10 : 10;
        next += Math.round((5 + 10 * rng.uniform()) * FS);
      }
      x[i] = 0.01 * 10 ** (g / 20) * rng.normal();
    }
    expect(detect(x)).toEqual([]);
  });

  it('announces nothing when mains hum with harmonics switches on (a step, not a growth)', () => {
    for (const mainsHz of [50, 60]) {
      const rng = createRng(mainsHz);
      const x = new Float32Array(20 * FS);
      for (let i = 0; i < x.length; i++) {
        const t = i / FS;
        let v = 0.003 * rng.normal();
        if (t > 8) for (let h = 1; h <= 7; h++) v += 0.05 * 0.5 ** (h - 1) * Math.sin(2 * Math.PI * mainsHz * h * t);
        x[i] = v;
      }
      expect(detect(x), `${mainsHz} Hz`).toEqual([]);
    }
  });

  it('announces nothing on knocks: two modes ringing down (an impulse response, not an onset)', () => {
    const rng = createRng(9);
    const x = new Float32Array(30 * FS);
    for (let i = 0; i < x.length; i++) {
      const t = i / FS;
      let v = 0.001 * rng.normal();
      for (const t0 of [4, 9, 14, 19, 24]) {
        if (t < t0) continue;
        const u = t - t0;
        v += 0.3 * Math.exp(-15 * u) * Math.sin(2 * Math.PI * 171 * u) + 0.1 * Math.exp(-40 * u) * Math.sin(2 * Math.PI * 343 * u);
      }
      x[i] = v;
    }
    expect(detect(x)).toEqual([]);
  });
});
