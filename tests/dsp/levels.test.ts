import { describe, expect, it } from 'vitest';
import {
  aWeightedToneDb,
  aWeightingDb,
  calibrationOffsetDb,
  dailyExposureLevelDba,
  euExposureBand,
  exposureCaution,
  nioshAllowedTimeH,
  nioshDosePercent,
  nioshTwaDba,
  paFromSplDb,
  peakLevelDb,
  splDbFromDbfs,
  splDbFromPa,
} from '../../dsp/levels';
import { expectedList, expectedScalar, ref } from '../reference/values';

describe('sound pressure level (ISO 1683 reference 20 µPa; REFERENCES.md §11)', () => {
  it('94 dB is 1.002374 Pa (test vector 35); 1 Pa is 93.9794 dB; 114 dB is 10.02374 Pa', () => {
    expect(Math.abs(paFromSplDb(94) - expectedScalar('v35_pressureOf94DbPa'))).toBeLessThanOrEqual(ref('v35_pressureOf94DbPa').tol);
    expect(Math.abs(splDbFromPa(1) - expectedScalar('s11_levelOf1PaDb'))).toBeLessThanOrEqual(ref('s11_levelOf1PaDb').tol);
    expect(Math.abs(paFromSplDb(114) - expectedScalar('s11_pressureOf114DbPa'))).toBeLessThanOrEqual(ref('s11_pressureOf114DbPa').tol);
  });
  it('round trip Pa → dB → Pa', () => {
    for (const p of [2e-5, 0.1, 3.7, 200]) expect(paFromSplDb(splDbFromPa(p)) / p).toBeCloseTo(1, 12);
  });
  it('calibration offset = 94 − reading (common practice): a calibrator read at −30 dBFS makes −30 dBFS read 94 dB', () => {
    const offset = calibrationOffsetDb(-30);
    expect(offset).toBe(124);
    expect(splDbFromDbfs(-30, offset)).toBe(94);
    expect(splDbFromDbfs(-50, calibrationOffsetDb(-30, 114))).toBe(94);
  });
  it('peak levels of the EU peak action values (test vector 40; 2003/10/EC Art. 3)', () => {
    expect(Math.abs(peakLevelDb(140) - expectedScalar('v40_peakLevelDb'))).toBeLessThanOrEqual(ref('v40_peakLevelDb').tol);
    const [l112, l200] = expectedList('eu_peakLevels');
    expect(Math.abs(peakLevelDb(112) - l112)).toBeLessThanOrEqual(ref('eu_peakLevels').tol);
    expect(Math.abs(peakLevelDb(200) - l200)).toBeLessThanOrEqual(ref('eu_peakLevels').tol);
  });
});

describe('A-weighting, IEC 61672-1:2013 analytic form', () => {
  it('formula values at 100, 170, 1000 Hz (test vector 33)', () => {
    const freqs = ref('v33_aWeightingDb').inputs.frequencyHz as number[];
    const want = expectedList('v33_aWeightingDb');
    freqs.forEach((f, i) => expect(Math.abs(aWeightingDb(f) - want[i])).toBeLessThanOrEqual(ref('v33_aWeightingDb').tol));
  });
  it('matches the standard table (0.1 dB rounding) at the exact base-10 frequencies (test vector 34)', () => {
    const freqs = ref('v34_aWeightingTableDb').inputs.frequencyHz as number[];
    const want = expectedList('v34_aWeightingTableDb');
    freqs.forEach((f, i) => expect(Math.abs(aWeightingDb(f) - want[i])).toBeLessThanOrEqual(ref('v34_aWeightingTableDb').tol));
  });
  it('a tone level in dB(A) adds the weighting', () => {
    expect(aWeightedToneDb(90, 1000)).toBeCloseTo(90, 3);
    expect(aWeightedToneDb(90, 100)).toBeCloseTo(90 - 19.145, 3);
  });
});

describe('noise exposure (NIOSH 1998 criteria document; Directive 2003/10/EC)', () => {
  it('NIOSH allowed time 8 h / 2^((L − 85)/3) (test vector 37)', () => {
    const levels = ref('v37_nioshAllowedTimeH').inputs.levelDba as number[];
    const want = expectedList('v37_nioshAllowedTimeH');
    levels.forEach((l, i) => expect(Math.abs(nioshAllowedTimeH(l) - want[i])).toBeLessThanOrEqual(1e-12));
  });
  it('NIOSH dose and TWA: 2 h at 91 + 6 h at 82 dB(A) (test vector 38)', () => {
    const ex = (ref('v38_nioshDosePercent').inputs.exposures as number[][]).map(([levelDba, durationH]) => ({ levelDba, durationH }));
    const dose = nioshDosePercent(ex);
    expect(Math.abs(dose - expectedScalar('v38_nioshDosePercent'))).toBeLessThanOrEqual(ref('v38_nioshDosePercent').tol);
    expect(Math.abs(nioshTwaDba(dose) - expectedScalar('v38_nioshTwaDba'))).toBeLessThanOrEqual(ref('v38_nioshTwaDba').tol);
  });
  it('L_EX,8h of 94 dB(A) for 1 h (test vector 39)', () => {
    expect(Math.abs(dailyExposureLevelDba(94, 1) - expectedScalar('v39_lex8hDba'))).toBeLessThanOrEqual(ref('v39_lex8hDba').tol);
  });
  it('EU bands at 80 / 85 / 87 dB(A) and 112 / 140 / 200 Pa peak (2003/10/EC Art. 3)', () => {
    expect(euExposureBand(79.9)).toBe('below-lower-action');
    expect(euExposureBand(80)).toBe('lower-action');
    expect(euExposureBand(85)).toBe('upper-action');
    expect(euExposureBand(87)).toBe('limit');
    expect(euExposureBand(70, 150)).toBe('upper-action');
    expect(euExposureBand(70, 200)).toBe('limit');
  });
  it('cautions readout: 94 dB(A) allows 1 h and advises protection (NIOSH 1998; common practice at 85 dB(A))', () => {
    const c = exposureCaution(94);
    expect(c.allowedTimeH).toBeCloseTo(1, 12);
    expect(c.euBandFor8h).toBe('limit');
    expect(c.isProtectionAdvised).toBe(true);
    expect(exposureCaution(70).isProtectionAdvised).toBe(false);
  });
});
