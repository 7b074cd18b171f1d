/**
 * Pressure-sensor data in pascals: the analysis sees samples scaled to full scale, so a sensor
 * file carries its scale as a calibration, dB SPL = dBFS + offset, like a calibrated microphone.
 * With samples x = p / P (P pascals per full scale) a tone of peak amplitude a (dBFS = 20·lg a,
 * full-scale sine = 0 dBFS) has p_rms = a·P/√2, so
 *   L_p = 20·lg(p_rms / 20 µPa) = dBFS + 20·lg(P / (√2 · 20 µPa))      (REFERENCES.md §11).
 */
import { csvSplOffsetDb } from '../../dsp/io/csv';
import { paFromSplDb } from '../../dsp/levels';
import type { Calibration } from '../settings';

/** The dBFS → dB SPL offset of sensor data scaled at `pascalsPerFullScale` Pa per full scale. */
export function sensorOffsetDb(pascalsPerFullScale: number): number {
  return csvSplOffsetDb(-Math.log2(pascalsPerFullScale));
}

/** The calibration a Pa sensor file carries (not a microphone's: no roll-off, no device), from its dBFS → dB SPL offset. */
export function sensorCalibration(offsetDb: number): Calibration {
  return { offsetDb, source: 'pressure data in Pa', dateIso: '' };
}

export { paFromSplDb };
