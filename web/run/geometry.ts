/**
 * The duct geometry the Duct screen keeps (localStorage), read for a session only when the user
 * chooses to attach it: a session holds no geometry ("not given") until the user sets one.
 */
import type { DuctGeometry } from '../../dsp/types';
import { formatFixed } from '../format';

/** localStorage key where the Duct screen keeps the geometry the user set. */
export const GEOMETRY_KEY = 'humgauge.ductGeometry';

/** The Duct screen's geometry when it is stored and sound, else undefined. */
export function readDuctScreenGeometry(): DuctGeometry | undefined {
  try {
    const raw = localStorage.getItem(GEOMETRY_KEY);
    if (!raw) return undefined;
    const g = JSON.parse(raw) as Partial<DuctGeometry>;
    const isPositive = (v: unknown): boolean => typeof v === 'number' && Number.isFinite(v) && v > 0;
    if (!isPositive(g.lengthM) || !isPositive(g.diameterM) || typeof g.gasTemperatureC !== 'number' || !Number.isFinite(g.gasTemperatureC)) return undefined;
    if (g.ends !== 'open-open' && g.ends !== 'open-closed' && g.ends !== 'closed-closed') return undefined;
    if (g.openEnd !== 'unflanged' && g.openEnd !== 'flanged' && g.openEnd !== 'none') return undefined;
    return g as DuctGeometry;
  } catch {
    return undefined;
  }
}

/** "1.20 m long, 48 mm bore, open–open, gas 20 °C" (units on every figure). */
export function describeGeometry(g: DuctGeometry): string {
  const ends = g.ends.replace('-', '–');
  const heater = g.heaterPositionM !== undefined && g.hotTemperatureC !== undefined ? `, heater at ${formatFixed(g.heaterPositionM, 2)} m (hot side ${formatFixed(g.hotTemperatureC, 0)} °C)` : '';
  return `${formatFixed(g.lengthM, 2)} m long, ${formatFixed(g.diameterM * 1000, 0)} mm bore, ${ends}, gas ${formatFixed(g.gasTemperatureC, 0)} °C${heater}`;
}
