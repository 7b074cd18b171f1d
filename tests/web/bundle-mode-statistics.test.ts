import * as v from 'valibot';
import { describe, expect, it } from 'vitest';
import { REPORT_VERSION, type Report } from '../../dsp/types';
import { ReportSchema } from '../../web/storage/bundle-schema';

const report: Report = {
  reportVersion: REPORT_VERSION,
  sampleRateHz: 16000,
  durationS: 60,
  onsets: [],
  segments: [],
  noiseDriven: [],
  modeStatistics: [
    { frequencyHz: 170.2, startS: 0.5, endS: 59.5, linearGrowthRatePerS: -4.9, linearGrowthRateCi95PerS: [-5.7, -4.1], saturation: 0, noiseIntensity: 1e-4, regime: 'stable', method: 'lorentzian' },
    { frequencyHz: 90, startS: 0.5, endS: 12, linearGrowthRatePerS: null, linearGrowthRateCi95PerS: null, saturation: null, noiseIntensity: null, regime: 'undetermined', method: 'none', reason: 'stretch too short' },
  ],
  summary: { frequencyHz: null, growthRatePerS: null, decayRatePerS: null, effectiveGainPerS: null, dampingRatio: null, qFactor: null },
};

describe('exported sessions carry report.modeStatistics', () => {
  it('a report with the growth rate from noise passes the bundle schema; an unknown regime does not', () => {
    expect(v.safeParse(ReportSchema, report).success).toBe(true);
    const bad = { ...report, modeStatistics: [{ ...report.modeStatistics![0], regime: 'loud' }] };
    expect(v.safeParse(ReportSchema, bad).success).toBe(false);
  });
});
