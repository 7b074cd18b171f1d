import { describe, expect, it } from 'vitest';
import { createAnalysis } from '../../dsp/index';
import { normalFormMode, noiseDrivenMode, synthesize } from '../../dsp/synth';
import type { Report } from '../../dsp/types';

function analyse(x: Float32Array, fs: number): Report {
  const a = createAnalysis({ sampleRateHz: fs });
  for (let i = 0; i < x.length; i += 4096) a.push(x.subarray(i, Math.min(x.length, i + 4096)));
  return a.finish();
}

describe('report.modeStatistics: the linear growth rate from noise per stretch of steady operation', () => {
  it('a quiet resonance gives a stable entry with ν = −decay rate (REFERENCES.md §7, §42)', () => {
    const fs = 8000;
    // The noise-driven resonance of tests/dsp/pipeline.test.ts: α = 5 1/s at 170 Hz, 30 s.
    const mode = noiseDrivenMode({ sampleRateHz: fs, durationS: 30, frequencyHz: 170, decayPerS: 5, rmsAmplitude: 0.05, seed: 21 });
    const floor = synthesize({ sampleRateHz: fs, durationS: 30, noiseRms: 0.005, seed: 22 });
    for (let i = 0; i < mode.length; i++) mode[i] += floor[i];
    const report = analyse(mode, fs);
    const entry = (report.modeStatistics ?? []).find((m) => Math.abs(m.frequencyHz - 170) < 1);
    expect(entry).toBeDefined();
    if (entry === undefined) return;
    expect(entry.endS - entry.startS).toBeGreaterThan(20);
    expect(entry.regime).toBe('stable');
    // REFERENCES.md §7: spread of the estimate on 30 s about 0.46 1/s; allow about 3 sd.
    expect(Math.abs((entry.linearGrowthRatePerS ?? Number.NaN) + 5)).toBeLessThan(1.5);
    const ci = entry.linearGrowthRateCi95PerS;
    expect(ci).not.toBeNull();
  });

  it('a steady hum of the normal form gives a humming entry holding ν (dsp/synth.ts normalFormMode)', () => {
    const fs = 16000;
    const nu = 5;
    const hum = normalFormMode({ sampleRateHz: fs, durationS: 60, frequencyHz: 176, growthRatePerS: nu, saturation: nu / 0.04, noiseIntensity: 0.004, measurementNoiseRms: 0, seed: 4 });
    // 5 s of background, then the hum fades in over 2 s and holds for the rest.
    const x = synthesize({ sampleRateHz: fs, durationS: 65, noiseRms: 0.003, seed: 9 });
    for (let i = 0; i < hum.samples.length; i++) x[5 * fs + i] += hum.samples[i] * Math.min(1, i / (2 * fs));
    const report = analyse(x, fs);
    const entry = (report.modeStatistics ?? []).find((m) => m.regime !== 'undetermined' && Math.abs(m.frequencyHz - 176) < 1);
    expect(entry).toBeDefined();
    if (entry === undefined) return;
    expect(entry.regime).toBe('humming');
    expect(entry.startS).toBeGreaterThan(5);
    const ci = entry.linearGrowthRateCi95PerS ?? [Number.NaN, Number.NaN];
    // A 95 % interval; 1.5 half-widths is a ~3-sd bound (the bench measures coverage).
    expect(Math.abs((entry.linearGrowthRatePerS ?? Number.NaN) - nu)).toBeLessThan(0.75 * (ci[1] - ci[0]));
  });
});
