import { describe, expect, it } from 'vitest';
import { modeStatisticsLines } from '../../dsp/cli/format';
import type { Report } from '../../dsp/types';

const base: Report = {
  reportVersion: 1,
  sampleRateHz: 16000,
  durationS: 60,
  onsets: [],
  segments: [],
  noiseDriven: [],
  summary: { frequencyHz: null, growthRatePerS: null, decayRatePerS: null, effectiveGainPerS: null, dampingRatio: null, qFactor: null },
};

describe('summary block "linear growth rate (from noise)"', () => {
  it('shows each entry with its unit, interval and regime, and a reason when it cannot tell', () => {
    const text = modeStatisticsLines({
      ...base,
      modeStatistics: [
        { frequencyHz: 176.2, startS: 0, endS: 40, linearGrowthRatePerS: -4.87, linearGrowthRateCi95PerS: [-5.6, -4.1], saturation: 0, noiseIntensity: 1e-3, regime: 'stable', method: 'lorentzian' },
        { frequencyHz: 176.2, startS: 41, endS: 52, linearGrowthRatePerS: 1.2, linearGrowthRateCi95PerS: [-0.4, 2.8], saturation: 30, noiseIntensity: 1e-3, regime: 'undetermined', method: 'amplitude-pdf', reason: 'stretch shorter than 20 s' },
        { frequencyHz: 90, startS: 53, endS: 60, linearGrowthRatePerS: null, linearGrowthRateCi95PerS: null, saturation: null, noiseIntensity: null, regime: 'undetermined', method: 'none', reason: 'stretch too short' },
      ],
    }).join('\n');
    expect(text).toMatch(/linear growth rate \(from noise\) 1\/s/);
    expect(text).toMatch(/-4\.87/);
    expect(text).toMatch(/\[-5\.60, -4\.10\]/);
    expect(text).toMatch(/cannot tell: stretch shorter than 20 s/);
    // Every number shown is finite: no NaN or Infinity for an entry without an estimate.
    expect(text).not.toMatch(/NaN|Infinity/);
  });
  it('adds nothing when the report has no entry', () => {
    expect(modeStatisticsLines(base)).toEqual([]);
  });
});
