/**
 * The app's per-tone cycle medians against the analysis's own (dsp/report.ts): on a synthetic
 * train of hum cycles (dsp/synth.ts, Stuart–Landau growth then exponential decay, REFERENCES.md
 * §5–6) the main tone's median growth and decay rates and their spreads, computed by the app from
 * the report's cycles, equal the report summary's, and lie near the synthetic truth.
 */
import { describe, expect, it } from 'vitest';
import { createAnalysis } from '../../dsp/pipeline';
import { humCycleEnvelope, synthesize, type ToneSpec } from '../../dsp/synth';
import { cyclesOf } from '../../web/run/cycles';

describe('cycle medians of the app and of the analysis agree', () => {
  it('five cycles at 8 1/s growth and 5 1/s decay', () => {
    const fs = 8000;
    const tones: ToneSpec[] = [];
    let t = 1;
    for (let c = 0; c < 5; c++) {
      const on = t;
      const off = on + Math.log(0.2 / 1e-4) / 8 + 2;
      const env = humCycleEnvelope({ onsetS: on, startAmplitude: 1e-4, growthPerS: 8, limitAmplitude: 0.2, offS: off, decayPerS: 5 });
      tones.push({ frequencyHz: 173, envelope: (s) => (s < off + 1.5 ? env(s) : 0) });
      t = off + 1.5 + 4;
    }
    const x = synthesize({ sampleRateHz: fs, durationS: t + 1, tones, noiseRms: 0.002, seed: 3 });
    const a = createAnalysis({ sampleRateHz: fs });
    for (let i = 0; i < x.length; i += 4096) a.push(x.subarray(i, Math.min(x.length, i + 4096)));
    const r = a.finish();
    const tone = cyclesOf(r).tones.find((k) => Math.abs(k.frequencyHz - 173) < 2);
    expect(tone?.cycles.length).toBe(r.summary.cycleCount);
    expect(tone?.growth?.medianPerS).toBe(r.summary.growthRateCycleMedianPerS);
    expect(tone?.growth?.spreadPerS).toBeCloseTo(r.summary.growthRateCycleSpreadPerS ?? Number.NaN, 12);
    expect(tone?.decay?.medianPerS).toBe(r.summary.decayRateCycleMedianPerS);
    expect(tone?.decay?.spreadPerS).toBeCloseTo(r.summary.decayRateCycleSpreadPerS ?? Number.NaN, 12);
    // Near the truth (within 5 %, the tolerance of tests/dsp/tone-model.test.ts).
    expect(Math.abs((tone?.growth?.medianPerS ?? 0) - 8)).toBeLessThan(0.4);
    expect(Math.abs((tone?.decay?.medianPerS ?? 0) - 5)).toBeLessThan(0.25);
  });
});
