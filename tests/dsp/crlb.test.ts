import { describe, expect, it } from 'vitest';
import { crlbDampedTone, crlbFrequencyConstantToneHz } from '../../dsp/crlb';
import { expectedList, expectedScalar, ref } from '../reference/values';

function relErr(a: number, b: number): number {
  return Math.abs(a / b - 1);
}

const BASE = { sampleRateHz: 8000, frequencyHz: 170, amplitude: 1, durationS: 1, snrDb: 10 };

describe('Cramér–Rao bound of a growing/decaying real tone (REFERENCES.md §8, crlb.py)', () => {
  it('σ = 0, T = 1 s, 10 dB: sd(f) 1.9492e-3 Hz, sd(σ) 1.2247e-2 1/s (test vector 27, 0.05 %)', () => {
    const b = crlbDampedTone({ ...BASE, ratePerS: 0 });
    expect(relErr(b.sdFrequencyHz, expectedScalar('v27_crlbSdFrequencyHz'))).toBeLessThanOrEqual(ref('v27_crlbSdFrequencyHz').tol);
    expect(relErr(b.sdRatePerS, expectedScalar('v27_crlbSdRatePerS'))).toBeLessThanOrEqual(ref('v27_crlbSdRatePerS').tol);
  });
  it('σ = −5: sd(f) 1.7836e-2 Hz (test vector 28, 0.05 %)', () => {
    const b = crlbDampedTone({ ...BASE, ratePerS: -5 });
    expect(relErr(b.sdFrequencyHz, expectedScalar('v28_crlbSdFrequencyHz'))).toBeLessThanOrEqual(ref('v28_crlbSdFrequencyHz').tol);
  });
  it('further table entries: growing tone, short decaying record, amplitude referred to mid-record (§8)', () => {
    for (const key of ['s8_crlbGrowing', 's8_crlbShortDecay', 's8_crlbMidRef']) {
      const r = ref(key);
      const inp = r.inputs as { durationS: number; snrDb: number; ratePerS: number; refTimeS?: number };
      const b = crlbDampedTone({ ...BASE, durationS: inp.durationS, snrDb: inp.snrDb, ratePerS: inp.ratePerS, refTimeS: inp.refTimeS });
      const [sdF, sdS] = expectedList(key);
      expect(relErr(b.sdFrequencyHz, sdF)).toBeLessThanOrEqual(r.tol);
      expect(relErr(b.sdRatePerS, sdS)).toBeLessThanOrEqual(r.tol);
    }
  });
  it('at σ = 0 agrees with the closed-form asymptotic bound (Kay 1993, Ex. 3.14 [from memory]) to 5 significant figures', () => {
    for (const [durationS, snrDb] of [[0.5, 0], [1, 10], [2, 20]]) {
      const b = crlbDampedTone({ ...BASE, durationS, snrDb, ratePerS: 0 });
      const kay = crlbFrequencyConstantToneHz(8000, b.n, 10 ** (snrDb / 10));
      expect(relErr(b.sdFrequencyHz, kay)).toBeLessThan(1e-4);
    }
  });
  it('scales as 1/√SNR and sd(σ) ≈ 2π·sd(f) (REFERENCES.md §8 notes: ratio 0.9993–1.0006)', () => {
    const a = crlbDampedTone({ ...BASE, ratePerS: 5, snrDb: 0 });
    const b = crlbDampedTone({ ...BASE, ratePerS: 5, snrDb: 20 });
    expect(a.sdFrequencyHz / b.sdFrequencyHz).toBeCloseTo(10, 9);
    for (const r of [-5, 0, 5]) {
      const c = crlbDampedTone({ ...BASE, ratePerS: r });
      expect(Math.abs(c.sdRatePerS / (2 * Math.PI * c.sdFrequencyHz) - 1)).toBeLessThan(1e-3);
    }
  });
});
