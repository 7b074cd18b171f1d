import { describe, expect, it } from 'vitest';
import { fitSaturation, landauAmplitude } from '../../dsp/fit-saturation';
import type { EnvelopeSeries } from '../../dsp/types';
import { envelopePowerSeries } from './fit-fixtures';

/**
 * The saturation fit through a known kernel evaluates its model in two ways: when every sample
 * time lies on the kernel's clock it computes the curve once per clock tick and lets the samples
 * share those values; otherwise once per tap and sample. Both must give the same fit (the
 * independent-agreement habit of STYLE: the direct sum is the oracle of the shared one).
 */
describe('saturation fit through a kernel: shared clock against tap by tap', () => {
  // Blackman taps (Blackman & Tukey 1958) at the 300 Hz envelope clock, 13 taps (the wide band's
  // length in the pipeline: one-sided noise bandwidth 1.73·300/(2·13) ≈ 20 Hz); samples every
  // third tick, as the block means of three envelope samples the pipeline fits.
  const clockHz = 300;
  const taps = 13;
  const weights = Array.from({ length: taps }, (_, k) => 0.42 - 0.5 * Math.cos((2 * Math.PI * (k + 1)) / (taps + 1)) + 0.08 * Math.cos((4 * Math.PI * (k + 1)) / (taps + 1)));
  const kernel = { weights, spacingS: 1 / clockHz };
  const landau = { ratePerS: 8, cubicCoefficient: 8 / 0.09, startAmplitude: 3e-4, startS: 1 };

  function series(seed: number): EnvelopeSeries {
    return envelopePowerSeries({ amplitude: (t) => landauAmplitude(t, landau), noisePower: 1e-6, envelopeRateHz: clockHz / 3, bandwidthHz: 20, startS: 0.2, durationS: 2.5, seed });
  }

  it('gives the same rate, interval and limit when the times leave the clock by 1e-7 s', () => {
    for (const seed of [3, 17, 29]) {
      const onClock = series(seed);
      // ±1e-7 s is 3e-5 of a tick (the shared clock is refused beyond 1e-6) and moves the curve by
      // s·1e-7 ≈ 1e-6 of itself: the two fits may differ by about that much, no more.
      const offClock = { ...onClock, timeS: onClock.timeS.map((t, i) => t + (i % 2 === 0 ? 1e-7 : -1e-7)) };
      const a = fitSaturation(onClock, { kernel, backgroundPower: 1e-6 });
      const b = fitSaturation(offClock, { kernel, backgroundPower: 1e-6 });
      expect(a.isValid && b.isValid).toBe(true);
      expect(a.model).toBe(b.model);
      expect(Math.abs(a.ratePerS - b.ratePerS)).toBeLessThan(1e-4 * a.ratePerS);
      expect(Math.abs(a.ci95PerS[1] - a.ci95PerS[0] - (b.ci95PerS[1] - b.ci95PerS[0]))).toBeLessThan(1e-3 * (a.ci95PerS[1] - a.ci95PerS[0]));
      expect(Math.abs(a.limitAmplitude / b.limitAmplitude - 1)).toBeLessThan(1e-5);
      // And both recover the Landau rate within its interval's reach (a 95 % interval misses now and then).
      expect(Math.abs(a.ratePerS - landau.ratePerS)).toBeLessThan(2 * (a.ci95PerS[1] - a.ci95PerS[0]));
    }
  });
});
