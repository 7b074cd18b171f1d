/**
 * Stretches of steady hum for the growth rate from noise (dsp/mode-statistics.ts): while every
 * active tone holds its limit cycle (regime 'steady') the conditioned samples are kept; when a tone
 * grows or decays again, or at a gap or the end, the stretch is closed and each steady tone's
 * statistics are estimated. Quiet stretches are handled by dsp/quiet-store.ts; the two are never
 * open at once, so this store writes into the quiet store's ring (no second buffer).
 */
import { readRing, writeRing } from './history';
import { modeStatisticsEntry } from './mode-statistics';
import type { ModeStatistics } from './types';

/** Kept out of a steady stretch after the knee into the limit cycle, s (a growth at 3 1/s is within 1 % of its limit 1.5 s after the regime calls it steady). */
export const STEADY_SETTLE_S = 1.5;
/** Shortest steady stretch worth estimating, s (the estimate is reported, its regime undetermined below dsp/mode-statistics.ts MODE_STATISTICS_MIN_S). */
const STEADY_MIN_S = 10;

export interface SteadyStore {
  ring: Float32Array;
  startJ: number;
  isOpen: boolean;
  analysisRateHz: number;
  /** Frequencies of the steady tones of the open stretch, Hz. */
  tonesHz: number[];
  results: ModeStatistics[];
}

/** A steady store sharing `ring` (the quiet store's) at analysisRateHz. */
export function createSteadyStore(ring: Float32Array, analysisRateHz: number): SteadyStore {
  return { ring, startJ: 0, isOpen: false, analysisRateHz, tonesHz: [], results: [] };
}

/** Keeps conditioned samples x[from, to) starting at global analysis index j0 while a stretch is open. */
export function stepSteadyStore(ss: SteadyStore, x: Float32Array, from: number, to: number, j0: number): void {
  if (!ss.isOpen) return;
  const cap = ss.ring.length;
  writeRing(ss.ring, x, from, to, j0);
  const j = j0 + (to - from);
  if (ss.startJ < j - cap) ss.startJ = j - cap;
}

/** Opens a steady stretch at analysis index j for tones at tonesHz. */
export function openSteadyStretch(ss: SteadyStore, j: number, tonesHz: number[]): void {
  ss.isOpen = true;
  ss.startJ = j;
  ss.tonesHz = tonesHz;
}

/** Closes the open stretch at analysis index jEnd; `isClippedSince(j)` tells whether the input clipped from j on. */
export function closeSteadyStretch(ss: SteadyStore, jEnd: number, timeOf: (j: number) => number, isClippedSince: (j: number) => boolean): void {
  if (!ss.isOpen) return;
  ss.isOpen = false;
  const cap = ss.ring.length;
  const j0 = Math.max(ss.startJ, jEnd - cap);
  const len = jEnd - j0;
  if (len < STEADY_MIN_S * ss.analysisRateHz) return;
  const x = readRing(ss.ring, j0, len);
  for (const f of ss.tonesHz) {
    ss.results.push(modeStatisticsEntry(x, ss.analysisRateHz, { centreHz: f, startS: Math.max(0, timeOf(j0)), endS: timeOf(jEnd - 1), isClipped: isClippedSince(j0) }));
  }
}
