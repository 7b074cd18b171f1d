/**
 * Sound levels and noise-exposure helpers for the level readout and the cautions page:
 * dB SPL from pascals, microphone calibration offset, A-weighting, NIOSH allowed time and dose,
 * EU action values (REFERENCES.md §11, §13). A phone is not a sound level meter (IEC 61672-1
 * classes): levels computed here are indicative.
 */

/** Reference sound pressure in air, 20 µPa (ISO 1683; IEC 61672-1). */
export const REFERENCE_PRESSURE_PA = 20e-6;

/** Sound pressure level Lp = 20·log10(p_rms / 20 µPa), dB (definition; ISO 1683). */
export function splDbFromPa(pressureRmsPa: number): number {
  return 20 * Math.log10(pressureRmsPa / REFERENCE_PRESSURE_PA);
}

/** RMS pressure in Pa of a sound pressure level in dB (inverse of splDbFromPa). */
export function paFromSplDb(levelDb: number): number {
  return REFERENCE_PRESSURE_PA * 10 ** (levelDb / 20);
}

/** Peak sound pressure level 20·log10(p_peak / 20 µPa), dB, for the EU peak action values (Directive 2003/10/EC, Art. 3). */
export function peakLevelDb(peakPa: number): number {
  return splDbFromPa(peakPa);
}

/** Level of a calibrator commonly used in the field, dB SPL (94 dB ≈ 1 Pa; common practice). */
export const CALIBRATOR_LEVEL_DB = 94;

/**
 * Microphone calibration offset, dB: offset = L_calibrator − reading in dBFS with the calibrator on
 * the microphone (common practice; REFERENCES.md §11). Add it to any later dBFS reading.
 */
export function calibrationOffsetDb(measuredDbfs: number, calibratorLevelDb = CALIBRATOR_LEVEL_DB): number {
  return calibratorLevelDb - measuredDbfs;
}

/** dB SPL of a dBFS reading with a calibration offset (dB). */
export function splDbFromDbfs(levelDbfs: number, offsetDb: number): number {
  return levelDbfs + offsetDb;
}

/**
 * A-weighting in dB at frequency f (Hz), IEC 61672-1:2013 analytic form:
 * R_A(f) = 12194² f⁴ / ((f² + 20.6²)·√((f² + 107.7²)(f² + 737.9²))·(f² + 12194²)),
 * A(f) = 20·log10 R_A(f) + 2.00 dB (REFERENCES.md §11).
 */
export function aWeightingDb(frequencyHz: number): number {
  const f2 = frequencyHz * frequencyHz;
  const ra = (12194 ** 2 * f2 * f2) / ((f2 + 20.6 ** 2) * Math.sqrt((f2 + 107.7 ** 2) * (f2 + 737.9 ** 2)) * (f2 + 12194 ** 2));
  return 20 * Math.log10(ra) + 2.0;
}

/** A-weighted level dB(A) of a pure tone of level levelDb (dB SPL) at frequencyHz. */
export function aWeightedToneDb(levelDb: number, frequencyHz: number): number {
  return levelDb + aWeightingDb(frequencyHz);
}

/** NIOSH recommended exposure limit, 85 dB(A) as an 8-h TWA, 3 dB exchange rate (NIOSH 1998, Publ. 98-126). */
export const NIOSH_REL_DBA = 85;
const NIOSH_EXCHANGE_DB = 3;
const CRITERION_HOURS = 8;

/** NIOSH allowed daily exposure time in hours at a level in dB(A): T = 8 h / 2^((L − 85)/3) (NIOSH 1998). */
export function nioshAllowedTimeH(levelDba: number): number {
  return CRITERION_HOURS / 2 ** ((levelDba - NIOSH_REL_DBA) / NIOSH_EXCHANGE_DB);
}

/** NIOSH noise dose in percent: D = 100·Σ C_i/T_i (C_i hours at level L_i, T_i allowed hours) (NIOSH 1998). */
export function nioshDosePercent(exposures: readonly { levelDba: number; durationH: number }[]): number {
  let dose = 0;
  for (const e of exposures) dose += e.durationH / nioshAllowedTimeH(e.levelDba);
  return 100 * dose;
}

/** NIOSH 8-h time-weighted average from a dose: TWA = 10·log10(D/100) + 85 dB(A) (NIOSH 1998). */
export function nioshTwaDba(dosePercent: number): number {
  return 10 * Math.log10(dosePercent / 100) + NIOSH_REL_DBA;
}

/** Daily noise exposure level L_EX,8h = L_Aeq,Te + 10·log10(Te / 8 h), dB(A) (Directive 2003/10/EC; 3 dB exchange). */
export function dailyExposureLevelDba(laeqDba: number, durationH: number): number {
  return laeqDba + 10 * Math.log10(durationH / CRITERION_HOURS);
}

/** EU Directive 2003/10/EC, Art. 3: daily exposure L_EX,8h in dB(A) and peak pressure in Pa of the three thresholds. */
export const EU_EXPOSURE_VALUES = {
  lowerAction: { lex8hDba: 80, peakPa: 112 },
  upperAction: { lex8hDba: 85, peakPa: 140 },
  limit: { lex8hDba: 87, peakPa: 200 },
} as const;

/** Band of the EU action values a daily exposure falls in (Directive 2003/10/EC, Art. 3). */
export type EuExposureBand = 'below-lower-action' | 'lower-action' | 'upper-action' | 'limit';

/** Which EU band a daily exposure (dB(A)) and, optionally, a peak pressure (Pa) fall in: the higher of the two (Directive 2003/10/EC, Art. 3). */
export function euExposureBand(lex8hDba: number, peakPa = 0): EuExposureBand {
  const v = EU_EXPOSURE_VALUES;
  if (lex8hDba >= v.limit.lex8hDba || peakPa >= v.limit.peakPa) return 'limit';
  if (lex8hDba >= v.upperAction.lex8hDba || peakPa >= v.upperAction.peakPa) return 'upper-action';
  if (lex8hDba >= v.lowerAction.lex8hDba || peakPa >= v.lowerAction.peakPa) return 'lower-action';
  return 'below-lower-action';
}

/**
 * Cautions readout for a steady level in dB(A): NIOSH allowed time (h), the EU band an 8-hour
 * day at this level would reach, and whether hearing protection is advised (at or above 85 dB(A),
 * common practice; REFERENCES.md §13).
 */
export function exposureCaution(levelDba: number): { allowedTimeH: number; euBandFor8h: EuExposureBand; isProtectionAdvised: boolean } {
  return {
    allowedTimeH: nioshAllowedTimeH(levelDba),
    euBandFor8h: euExposureBand(levelDba),
    isProtectionAdvised: levelDba >= NIOSH_REL_DBA,
  };
}

/**
 * Level of the error of a uniform quantiser with `bits` bits, dBFS (0 dBFS = a full-scale sine):
 * error power q²/12 with step q = 2·2^−bits against the full-scale sine's A²/2, i.e.
 * −(6.02·bits + 1.76) dB (REFERENCES.md §60). The products of quantising a periodic tone together
 * carry this power, so a line below it may be such a product rather than a tone.
 */
export function quantisationFloorDbfs(bits: number): number {
  return -(20 * Math.log10(2) * bits + 10 * Math.log10(1.5));
}
