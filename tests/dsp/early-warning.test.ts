import { describe, expect, it } from 'vitest';
import { earlyWarningIndicators, kendallTau } from '../../dsp/early-warning';
import { createRng } from '../../dsp/synth';

describe('early-warning indicators (REFERENCES.md §43)', () => {
  it("Kendall's τ-b matches the direct pair counts of REFERENCES.md §43", () => {
    expect(kendallTau([1, 3, 2, 5, 4])).toBeCloseTo(0.6, 12);
    expect(kendallTau([5, 4, 3, 2, 1])).toBeCloseTo(-1, 12);
    expect(kendallTau([1, 2, 2, 3, 4])).toBeCloseTo(0.9486832981, 9);
    expect(Number.isNaN(kendallTau([1, 2]))).toBe(true);
  });

  it('an envelope whose damping falls towards zero shows rising variance and autocorrelation; a steady one shows no trend', () => {
    // Complex OU envelope u with ν(t) from −20 to −2 1/s (exact discrete update, REFERENCES.md §7):
    // variance σ²/(2|ν|) and lag autocorrelation e^{ν·lag} both rise (REFERENCES.md §43).
    const rate = 500;
    const n = 120 * rate;
    const run = (nuOf: (t: number) => number, seed: number): number[] => {
      const rng = createRng(seed);
      let ur = 0;
      let ui = 0;
      const amp: number[] = [];
      for (let i = 0; i < n; i++) {
        const nu = nuOf(i / rate);
        const a = Math.exp(nu / rate);
        const q = Math.sqrt((0.01 * (1 - a * a)) / (-2 * nu) / 2);
        ur = a * ur + q * rng.normal();
        ui = a * ui + q * rng.normal();
        amp.push(Math.hypot(ur, ui));
      }
      return amp;
    };
    const rising = earlyWarningIndicators(run((t) => -20 + (18 * t) / 120, 3), rate);
    expect(rising.varianceTrend).toBeGreaterThan(0.6);
    expect(rising.autocorrelationTrend).toBeGreaterThan(0.6);
    const steady = earlyWarningIndicators(run(() => -10, 4), rate);
    // 47 windows of a stationary record: τ has sd ≈ √(2(2n+5)/(9n(n−1))) ≈ 0.1 (Kendall 1938); 0.4 is 4 sd.
    expect(Math.abs(steady.varianceTrend)).toBeLessThan(0.4);
    expect(Math.abs(steady.autocorrelationTrend)).toBeLessThan(0.4);
    expect(rising.lagS).toBeCloseTo(0.01, 6);
  });
});
