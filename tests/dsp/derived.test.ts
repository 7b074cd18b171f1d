import { describe, expect, it } from 'vitest';
import {
  dampingRatio,
  deriveSummary,
  doublingTimeS,
  drivingRateFromNoisePerS,
  eFoldingTimeS,
  effectiveGainPerS,
  halfPowerWidthHz,
  levelRateDbPerS,
  logDecrement,
  mapInterval,
  normalisedGain,
  qFactor,
  stabilityMarginPerS,
  sumInterval,
  t60S,
} from '../../dsp/derived';
import { expectedScalar, ref } from '../reference/values';

describe('oscillator relations (REFERENCES.md §5 worked example: f = 170 Hz damped, α = 5 1/s)', () => {
  it('damping ratio, exact form α/ωn (test vector 16)', () => {
    expect(Math.abs(dampingRatio(5, 170) - expectedScalar('v16_dampingRatio'))).toBeLessThanOrEqual(ref('v16_dampingRatio').tol);
  });
  it('the light-damping form α/ωd differs from the exact one by ≈ ζ²/2 relative (REFERENCES.md §5: 4.681027e-3)', () => {
    const light = 5 / (2 * Math.PI * 170);
    expect(Math.abs(light - expectedScalar('s5_lightDampingRatio'))).toBeLessThanOrEqual(ref('s5_lightDampingRatio').tol);
    const zeta = dampingRatio(5, 170);
    expect(light / zeta - 1).toBeCloseTo((zeta * zeta) / 2, 9);
  });
  it('Q = 1/(2ζ) (test vector 17)', () => {
    expect(Math.abs(qFactor(5, 170) - expectedScalar('v17_qFactor'))).toBeLessThanOrEqual(ref('v17_qFactor').tol);
  });
  it('half-power width α/π (test vector 18)', () => {
    expect(Math.abs(halfPowerWidthHz(5) - expectedScalar('v18_halfPowerWidthHz'))).toBeLessThanOrEqual(ref('v18_halfPowerWidthHz').tol);
  });
  it('T60 = 3 ln10/α (test vector 19)', () => {
    expect(Math.abs(t60S(5) - expectedScalar('v19_t60S'))).toBeLessThanOrEqual(ref('v19_t60S').tol);
  });
  it('logarithmic decrement α/fd (test vector 20)', () => {
    expect(Math.abs(logDecrement(5, 170) - expectedScalar('v20_logDecrement'))).toBeLessThanOrEqual(ref('v20_logDecrement').tol);
  });
  it('doubling time ln2/s (test vector 21), e-folding time and half-life (§5)', () => {
    expect(Math.abs(doublingTimeS(5) - expectedScalar('v21_doublingTimeS'))).toBeLessThanOrEqual(ref('v21_doublingTimeS').tol);
    expect(Math.abs(eFoldingTimeS(5) - expectedScalar('s5_eFoldingTimeS'))).toBeLessThanOrEqual(ref('s5_eFoldingTimeS').tol);
    expect(Math.abs(doublingTimeS(-5) - expectedScalar('s5_halfLifeS'))).toBeLessThanOrEqual(ref('s5_halfLifeS').tol);
  });
  it('level rate 8.686 dB/s per 1/s (§5: 43.4294 dB/s at α = 5)', () => {
    expect(Math.abs(levelRateDbPerS(5) - expectedScalar('s5_decayDbPerS'))).toBeLessThanOrEqual(ref('s5_decayDbPerS').tol);
  });
});

describe('effective gain and margin (REFERENCES.md §6 worked example: s_g = 3, α = 5)', () => {
  it('β = s_g + α = 8, β/α = 1.6, margin −3 (test vector 22)', () => {
    const beta = effectiveGainPerS(3, 5);
    expect(beta).toBe(expectedScalar('v22_drivingRatePerS'));
    expect(Math.abs(normalisedGain(beta, 5) - expectedScalar('v22_normalisedGain'))).toBeLessThanOrEqual(ref('v22_normalisedGain').tol);
    expect(Math.abs(stabilityMarginPerS(5, beta) - expectedScalar('s6_stabilityMarginPerS'))).toBeLessThanOrEqual(1e-12);
  });
  it('driving rate from a noise-driven net decay: β = α − α_net (REFERENCES.md §6); consistent with the growth route', () => {
    // A mode with α = 5 and β = 8 would be unstable; with β = 3 the net decay is 2 1/s.
    expect(drivingRateFromNoisePerS(5, 2)).toBeCloseTo(3, 12);
    expect(stabilityMarginPerS(5, drivingRateFromNoisePerS(5, 2))).toBeCloseTo(2, 12);
  });
});

describe('interval propagation', () => {
  it('monotone transforms map interval ends, decreasing ones swap them', () => {
    const ci = mapInterval([4, 6], (a) => qFactor(a, 170));
    expect(ci[0]).toBeCloseTo(qFactor(6, 170), 10);
    expect(ci[1]).toBeCloseTo(qFactor(4, 170), 10);
  });
  it('sum of independent estimates: half-widths add in quadrature, per side', () => {
    const ci = sumInterval(3, [2, 4.5], 5, [4, 5.5]);
    expect(ci[0]).toBeCloseTo(8 - Math.hypot(1, 1), 12);
    expect(ci[1]).toBeCloseTo(8 + Math.hypot(1.5, 0.5), 12);
  });
  it('quadrature combination covers the sum of two independent normal estimates ~95 % of the time (seeded simulation)', async () => {
    const { createRng } = await import('../../dsp/synth');
    const rng = createRng(31);
    let hits = 0;
    const trials = 2000;
    const z = 1.959963984540054; // normal 0.975 quantile (A&S Table 26.5)
    for (let i = 0; i < trials; i++) {
      const a = 3 + 0.5 * rng.normal();
      const b = 5 + 0.2 * rng.normal();
      const ci = sumInterval(a, [a - z * 0.5, a + z * 0.5], b, [b - z * 0.2, b + z * 0.2]);
      if (ci[0] <= 8 && 8 <= ci[1]) hits++;
    }
    // Binomial sd at p = 0.95, n = 2000 is 0.49 %: accept ±1.5 % (3 sd).
    expect(hits / trials).toBeGreaterThan(0.935);
    expect(hits / trials).toBeLessThan(0.965);
  });
});

describe('deriveSummary', () => {
  it('fills every figure from a growth rate, a decay rate and a frequency (REFERENCES.md §5/§6 values)', () => {
    const s = deriveSummary({
      frequencyHz: 170,
      growth: { ratePerS: 3, ci95PerS: [2.5, 3.5] },
      decay: { decayRatePerS: 5, ci95PerS: [4.5, 5.6] },
      limitAmplitudeDbfs: -12,
    });
    expect(s.effectiveGainPerS).toBe(8);
    expect(Math.abs((s.dampingRatio ?? NaN) - expectedScalar('v16_dampingRatio'))).toBeLessThanOrEqual(1e-9);
    expect(Math.abs((s.qFactor ?? NaN) - expectedScalar('v17_qFactor'))).toBeLessThanOrEqual(1e-3);
    expect(Math.abs((s.t60S ?? NaN) - expectedScalar('v19_t60S'))).toBeLessThanOrEqual(1e-6);
    expect(s.doublingTimeS).toBeCloseTo(Math.LN2 / 3, 12);
    expect(s.eFoldingTimeS).toBeCloseTo(1 / 3, 12);
    expect(s.limitAmplitudeDbfs).toBe(-12);
    const [qLo, qHi] = s.qFactorCi95 ?? [NaN, NaN];
    expect(qLo).toBeCloseTo(qFactor(5.6, 170), 9);
    expect(qHi).toBeCloseTo(qFactor(4.5, 170), 9);
    const [zLo, zHi] = s.dampingRatioCi95 ?? [NaN, NaN];
    expect(zLo).toBeLessThan(s.dampingRatio ?? NaN);
    expect(zHi).toBeGreaterThan(s.dampingRatio ?? NaN);
    const [gLo, gHi] = s.effectiveGainCi95PerS ?? [NaN, NaN];
    expect(gLo).toBeCloseTo(8 - Math.hypot(0.5, 0.5), 12);
    expect(gHi).toBeCloseTo(8 + Math.hypot(0.5, 0.6), 12);
  });
  it('leaves out what it cannot derive', () => {
    const s = deriveSummary({ frequencyHz: null, growth: { ratePerS: 4, ci95PerS: [3, 5] }, decay: null });
    expect(s.effectiveGainPerS).toBeNull();
    expect(s.dampingRatio).toBeNull();
    expect(s.qFactor).toBeNull();
    expect(s.t60S).toBeNull();
    expect(s.growthRatePerS).toBe(4);
    expect(s.doublingTimeS).toBeCloseTo(Math.LN2 / 4, 12);
  });
  it('drops ζ and Q intervals that would reach a non-positive decay rate', () => {
    const s = deriveSummary({ frequencyHz: 170, growth: null, decay: { decayRatePerS: 0.5, ci95PerS: [-0.2, 1.2] } });
    expect(s.qFactor).toBeGreaterThan(0);
    expect(s.qFactorCi95).toBeNull();
    expect(s.dampingRatioCi95).toBeNull();
    expect(s.decayRateCi95PerS).toEqual([-0.2, 1.2]);
  });
});
