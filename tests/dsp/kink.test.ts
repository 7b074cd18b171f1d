// Change point of a two-segment line through ln A² (dsp/kink.ts; two-phase regression, Hinkley
// 1971, REFERENCES.md §31). Truth is the kink placed in the synthetic envelope.
import { describe, expect, it } from 'vitest';
import { findKink } from '../../dsp/kink';
import { createRng } from '../../dsp/synth';

const RATE_HZ = 300;

/** Steady power 1 until kinkS, then a free decay at decayPerS (amplitude e-folding rate), plus background. */
function envelope(kinkS: number, decayPerS: number, bg: number, n: number, noiseDb = 0, seed = 1): { timeS: Float64Array; power: Float64Array } {
  const rng = createRng(seed);
  const timeS = new Float64Array(n);
  const power = new Float64Array(n);
  for (let k = 0; k < n; k++) {
    const t = k / RATE_HZ;
    timeS[k] = t;
    const p = t < kinkS ? 1 : Math.exp(-2 * decayPerS * (t - kinkS));
    power[k] = p * 10 ** ((noiseDb * rng.normal()) / 10) + bg;
  }
  return { timeS, power };
}

/** Moving average of odd length len (a symmetric, linear-phase blur like the envelope low-pass). */
function blur(x: Float64Array, len: number): Float64Array {
  const out = new Float64Array(x.length);
  const h = (len - 1) / 2;
  for (let k = 0; k < x.length; k++) {
    let s = 0;
    let c = 0;
    for (let j = Math.max(0, k - h); j <= Math.min(x.length - 1, k + h); j++) {
      s += x[j];
      c++;
    }
    out[k] = s / c;
  }
  return out;
}

describe('findKink', () => {
  it('finds a sharp kink from steady to decay exactly, with both slopes (ln A² falls at 2 × rate)', () => {
    const { timeS, power } = envelope(1.5, 20, 1e-8, 900);
    const k = findKink(timeS, power, { i0: 0, i1: 900, s0: 0, s1: 900, minSide: 10, backgroundPower: 1e-8, floorRatio: 10 });
    expect(k).not.toBeNull();
    expect(Math.abs((k?.timeS ?? 0) - 1.5)).toBeLessThanOrEqual(1 / RATE_HZ);
    expect(k?.slopeBefore ?? NaN).toBeCloseTo(0, 6);
    expect(k?.slopeAfter ?? NaN).toBeCloseTo(-40, 4);
  });

  it('places a kink blurred by a symmetric kernel where the blurred lines meet, with scatter on the envelope', () => {
    // A boxcar of half-width h passes e^{−2αt} as e^{−2αt}·sinh(y)/y with y = 2αh (the mean of an
    // exponential over the box), so after the kink the line in ln A² stands ln(sinh y / y) higher
    // and meets the steady level ln(sinh y / y) / (2α) after the kink: always under h, so the fit
    // that skips half a kernel after the kink never reads the filter's transient. The tolerance,
    // a fifth of the kernel, leaves room for the 0.5 dB scatter of the envelope samples.
    for (const [kinkS, rate] of [
      [1.2, 5],
      [1.5, 27],
      [1.7, 60],
    ]) {
      const len = 51;
      const y = (2 * rate * (len - 1)) / 2 / RATE_HZ;
      const expected = kinkS + Math.log(Math.sinh(y) / y) / (2 * rate);
      const { timeS, power } = envelope(kinkS, rate, 1e-7, 1200, 0.5, Math.round(kinkS * 10));
      const p = blur(power, len);
      const k = findKink(timeS, p, { i0: 0, i1: 1200, s0: 0, s1: 1200, minSide: (len + 1) / 2, backgroundPower: 1e-7, floorRatio: 10 });
      expect(Math.abs((k?.timeS ?? 0) - expected), `kink at ${kinkS} s, decay ${rate} 1/s`).toBeLessThan(len / RATE_HZ / 5);
      expect(expected - kinkS).toBeLessThan((len - 1) / 2 / RATE_HZ);
    }
  });

  it('returns null when no candidate leaves minSide usable samples on each side', () => {
    const { timeS, power } = envelope(0.1, 20, 1e-8, 60);
    expect(findKink(timeS, power, { i0: 0, i1: 60, s0: 0, s1: 60, minSide: 40, backgroundPower: 1e-8, floorRatio: 10 })).toBeNull();
  });
});
