import { describe, expect, it } from 'vitest';
import { createRng } from '../../dsp/synth';
import { REPORT_VERSION, type Marker, type Report, type Segment } from '../../dsp/types';
import { buildStabilityMap, predictZeroCrossing, type MapSession, type MapStep } from '../../web/storage/stability';

const step = (control: number, rate: number, sd: number): MapStep => ({
  sessionId: 's',
  atMs: control,
  control,
  unit: 'W',
  state: rate > 0 ? 'humming' : 'quiet',
  ratePerS: rate,
  rateCi95PerS: [rate - 1.959963984540054 * sd, rate + 1.959963984540054 * sd],
  rateSource: 'from noise',
  limitAmplitudeDbfs: null,
});

describe('where the growth rate crosses zero (REFERENCES.md §44)', () => {
  it('a line through stable points predicts the threshold and says how far it extrapolates', () => {
    // Truth ν = 0.5 (x − 62) 1/s; settings 40 … 60 W, all stable.
    const p = predictZeroCrossing([40, 45, 50, 55, 60].map((x) => step(x, 0.5 * (x - 62), 0.3)));
    expect(p).not.toBeNull();
    if (p === null) return;
    expect(p.control).toBeCloseTo(62, 9);
    expect(p.extrapolation).toBeCloseTo(2, 9);
    expect(p.extrapolationSpans).toBeCloseTo(0.1, 9);
    expect(p.ci95).not.toBeNull();
    expect((p.ci95 as [number, number])[0]).toBeLessThan(62);
    expect((p.ci95 as [number, number])[1]).toBeGreaterThan(62);
  });

  it("Fieller's interval holds the true crossing in about 95 % of simulated maps (Fieller 1954: exact for Gaussian errors of known variance)", () => {
    const rng = createRng(17);
    let covered = 0;
    const trials = 400;
    for (let t = 0; t < trials; t++) {
      const steps = [40, 45, 50, 55, 60].map((x) => step(x, 0.5 * (x - 62) + 0.8 * rng.normal(), 0.8));
      const p = predictZeroCrossing(steps);
      if (p?.ci95 && p.ci95[0] <= 62 && 62 <= p.ci95[1]) covered++;
    }
    // Binomial(400, 0.95): sd 1.1 %; 91–99 % is about ±3.5 sd. (The Birge scaling only widens.)
    expect(covered / trials).toBeGreaterThan(0.91);
    expect(covered / trials).toBeLessThan(0.995);
  });

  it('a flat line (no significant slope) gives no interval: the crossing is not determined', () => {
    const p = predictZeroCrossing([40, 50, 60].map((x) => step(x, -3 + 0.001 * (x - 50), 1)));
    expect(p?.ci95).toBeNull();
    expect(predictZeroCrossing([step(40, -3, 1)])).toBeNull();
  });
});

describe('map fixes: hysteresis not determined, a quiet setting is quiet', () => {
  /** Two settings, 40 W quiet and 60 W humming, visited 40 → 60 → 40: onset and shut-off are bracketed by the same pair. */
  function twoSettings(): MapSession {
    const markers: Marker[] = [40, 60, 40].map((v, k) => ({ timeS: 20 * k, kind: 'setting', label: `heater ${v} W`, value: v, unit: 'W' }));
    const segments: Segment[] = [
      { kind: 'quiet', startS: 0, endS: 20.4, frequencyHz: 170, ratePerS: null, rateCi95PerS: null },
      { kind: 'growth', startS: 20.4, endS: 22, frequencyHz: 170, ratePerS: 4, rateCi95PerS: [3.8, 4.2], model: 'stuart-landau' },
      { kind: 'steady', startS: 22, endS: 40.6, frequencyHz: 170, ratePerS: null, rateCi95PerS: null, limitAmplitudeDbfs: -12 },
      // The hum's end is detected just after the marker; the setting is quiet from there on.
      { kind: 'decay', startS: 40.6, endS: 41.5, frequencyHz: 170, ratePerS: -27, rateCi95PerS: [-28, -26] },
      { kind: 'quiet', startS: 41.5, endS: 60, frequencyHz: 170, ratePerS: null, rateCi95PerS: null },
    ];
    const report: Report = {
      reportVersion: REPORT_VERSION,
      sampleRateHz: 16000,
      durationS: 60,
      onsets: [{ timeS: 20.4, frequencyHz: 170 }],
      segments,
      noiseDriven: [],
      modeStatistics: [
        { frequencyHz: 170, startS: 0.5, endS: 20, linearGrowthRatePerS: -2.1, linearGrowthRateCi95PerS: [-2.9, -1.3], saturation: 0, noiseIntensity: 1e-4, regime: 'stable', method: 'lorentzian' },
      ],
      summary: { frequencyHz: 170, growthRatePerS: 4, decayRatePerS: 27, effectiveGainPerS: 31, dampingRatio: 0.025, qFactor: 20 },
    };
    return { id: 'a', createdAtMs: 0, durationS: 60, markers, report };
  }

  it('says "not determined" for the hysteresis until the settings separate onset from shut-off', () => {
    const map = buildStabilityMap([twoSettings()]);
    expect(map.onsetControl).toBe(50);
    expect(map.shutOffControl).toBe(50);
    expect(map.hysteresis).toBeNull();
    expect(map.hysteresisRange).toBeNull();
  });

  it('a setting whose second half is quiet is a quiet (open) point, and its rate is the growth rate from noise', () => {
    const map = buildStabilityMap([twoSettings()]);
    expect(map.steps.map((s) => s.state)).toEqual(['quiet', 'humming', 'quiet']);
    expect(map.steps[0].rateSource).toBe('from noise');
    expect(map.steps[0].ratePerS).toBeCloseTo(-2.1, 12);
  });
});
