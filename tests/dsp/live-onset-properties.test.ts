// Live onsets of the whole analysis (dsp/pipeline.ts push(), detector dsp/live-onset.ts): property
// checks against synthesized truth (dsp/synth.ts). A growth anywhere in the band (exact mains
// multiples included) is announced once, at its frequency, after it starts; knocks (an abrupt rise
// within one kernel, then an exponential ring-down: the impulse response of a stable duct) and
// mains hum switched on are announced neither live nor in the report. Delay targets are the
// bench's (dsp/cli/bench.ts 2c); the bound here is the looser one a growth must always meet.
import { describe, expect, it } from 'vitest';
import { createAnalysis } from '../../dsp/index';
import { createRng, humCycleEnvelope, synthesize, type ToneSpec } from '../../dsp/synth';
import type { Onset, Report } from '../../dsp/types';

const FS = 8000;

function run(x: Float32Array, block = 512): { live: (Onset & { atS: number })[]; report: Report } {
  const a = createAnalysis({ sampleRateHz: FS });
  const live: (Onset & { atS: number })[] = [];
  for (let i = 0; i < x.length; i += block) {
    const end = Math.min(x.length, i + block);
    for (const o of a.push(x.subarray(i, end)).onsets) live.push({ ...o, atS: end / FS });
  }
  return { live, report: a.finish() };
}

describe('live onsets over the band', () => {
  it('announce each growth (3–50 1/s, 40–1000 Hz, mains multiples included) once, at its frequency, within 4 e-folds of its 6 dB point', () => {
    const rng = createRng(2024);
    const noiseRms = 10 ** (-50 / 20);
    // Mean square of white noise in a 10 Hz band (flat spectrum over FS/2): the 6 dB point's reference (bench 2a).
    const bandPower = (noiseRms * noiseRms * 10) / (FS / 2);
    const freqs = [100, 120, 150, 180, 40 + 960 * rng.uniform(), 40 + 960 * rng.uniform(), 40 + 960 * rng.uniform(), 40 + 960 * rng.uniform()];
    const rates = [3, 10, 30, 50, 3, 10, 30, 50];
    for (let c = 0; c < freqs.length; c++) {
      const freq = freqs[c];
      const rate = rates[c];
      const a6 = Math.sqrt(8 * bandPower);
      const onsetS = 3 + rng.uniform();
      const t6 = onsetS + Math.log(100) / rate;
      const env = humCycleEnvelope({ onsetS, startAmplitude: a6 / 100, growthPerS: rate, limitAmplitude: 0.3, offS: 99, decayPerS: 5 });
      const x = synthesize({ sampleRateHz: FS, durationS: t6 + Math.max(1.5, 6 / rate), tones: [{ frequencyHz: freq, envelope: env, phaseRad: 6.28 * rng.uniform() }], noiseRms, seed: c + 1 });
      // Blocks of 8 ms, so the announcement time is known to 0.4 e-fold at 50 1/s.
      const { live } = run(x, 64);
      const name = `${rate} 1/s at ${freq.toFixed(1)} Hz`;
      expect(live.length, name).toBe(1);
      // Within one bin of the 16 ms frame (62.5 Hz at 8 kHz).
      expect(Math.abs(live[0].frequencyHz - freq), name).toBeLessThanOrEqual(62.5);
      expect(live[0].timeS, name).toBeGreaterThan(onsetS);
      expect((live[0].atS - t6) * rate, name).toBeLessThan(4);
    }
  });

  it('announce every cycle of a hum that returns after quiet gaps of 0.5–5 s, its frequency drifting ±3 %', () => {
    // A train of cycles (growth 10 1/s from 1e-4 to 0.2, 1 s steady, decay 15 1/s for 0.6 s): each
    // cycle is an onset of its own, announced once, after it starts and before it reaches its limit.
    const rng = createRng(8);
    const tones: ToneSpec[] = [];
    const onsets: number[] = [];
    let t = 3;
    for (const gap of [0.5, 5, 1, 3, 0.7, 2]) {
      const on = t;
      const riseS = Math.log(0.2 / 1e-4) / 10;
      const off = on + riseS + 1;
      const end = off + 0.6;
      const env = humCycleEnvelope({ onsetS: on, startAmplitude: 1e-4, growthPerS: 10, limitAmplitude: 0.2, offS: off, decayPerS: 15 });
      tones.push({ frequencyHz: 173 * (1 + 0.06 * (rng.uniform() - 0.5)), envelope: (s) => (s < end ? env(s) : 0) });
      onsets.push(on);
      t = end + gap;
    }
    const x = synthesize({ sampleRateHz: FS, durationS: t + 1, tones, noiseRms: 0.002, seed: 12 });
    const { live } = run(x);
    expect(live).toHaveLength(onsets.length);
    const riseS = Math.log(0.2 / 1e-4) / 10;
    for (let c = 0; c < onsets.length; c++) {
      expect(live[c].timeS, `cycle ${c}`).toBeGreaterThan(onsets[c]);
      expect(live[c].atS, `cycle ${c}`).toBeLessThan(onsets[c] + riseS);
    }
  });

  it('announce no knock of one or two modes, live or in the report (an impulse response is no onset)', () => {
    const rng = createRng(31);
    for (let c = 0; c < 6; c++) {
      const f1 = 60 + 600 * rng.uniform();
      const modes = c % 2 === 0 ? 1 : 2;
      const levelDb = 25 + 25 * rng.uniform(); // over the full-band noise
      const a1 = 0.001 * 10 ** (levelDb / 20);
      const d1 = 5 + 35 * rng.uniform();
      const knockS = [3, 6.5, 10];
      const tones: ToneSpec[] = [];
      for (const t0 of knockS) {
        tones.push({ frequencyHz: f1, envelope: (t) => (t < t0 ? 0 : a1 * Math.exp(-d1 * (t - t0))), phaseRad: 0 });
        if (modes === 2) tones.push({ frequencyHz: 2.3 * f1, envelope: (t) => (t < t0 ? 0 : (a1 / 3) * Math.exp(-40 * (t - t0))), phaseRad: 0 });
      }
      const x = synthesize({ sampleRateHz: FS, durationS: 13, tones, noiseRms: 0.001, seed: 40 + c });
      const { live, report } = run(x);
      const name = `${modes} mode(s) at ${f1.toFixed(0)} Hz, ${levelDb.toFixed(0)} dB, decay ${d1.toFixed(0)} 1/s`;
      expect(live, name).toEqual([]);
      expect(report.onsets, name).toEqual([]);
    }
  });

  it('announce no mains hum with harmonics switched on (a step within one kernel, then steady)', () => {
    for (const mainsHz of [50, 60]) {
      const rng = createRng(mainsHz + 7);
      const x = new Float32Array(12 * FS);
      for (let i = 0; i < x.length; i++) {
        const t = i / FS;
        let v = 0.003 * rng.normal();
        if (t > 5) for (let h = 1; h <= 7; h++) v += 0.05 * 0.5 ** (h - 1) * Math.sin(2 * Math.PI * mainsHz * h * t);
        x[i] = v;
      }
      const { live } = run(x);
      expect(live, `${mainsHz} Hz`).toEqual([]);
    }
  });
});
