/**
 * Exponential time weighting of a level, as a sound level meter does it (IEC 61672-1:2013 §5.8,
 * REFERENCES.md §90): the displayed mean square follows
 *   y(t) = (1/τ) ∫ x(ξ) e^{−(t−ξ)/τ} dξ,
 * with τ = 0.125 s ("fast", F) or 1 s ("slow", S). For an input held constant over each step of
 * length Δt the exact update is y ← y·e^{−Δt/τ} + x·(1 − e^{−Δt/τ}), so rows arriving at an
 * uneven pace are weighted correctly. A steady tone then reads steady whatever its period is
 * against the analysis frame, and after the sound stops the level falls at 10·lg(e)/τ dB/s
 * (34.7 dB/s fast, 4.3 dB/s slow).
 */

/** Time constants of IEC 61672-1:2013 §5.8, s. */
export const TIME_CONSTANT_S = { fast: 0.125, slow: 1 } as const;

export type TimeWeighting = keyof typeof TIME_CONSTANT_S;

/** Words for the readout, e.g. "slow" → "time weighting S (1 s)". */
export const TIME_WEIGHTING_WORDS: Record<TimeWeighting, string> = {
  fast: 'time weighting F (0.125 s)',
  slow: 'time weighting S (1 s)',
};

export interface TimeWeightedLevel {
  readonly tauS: number;
  /** Weighted mean square (same unit as the input), NaN before the first row. */
  meanSquare: number;
  /** Time of the last row, s (NaN before the first). */
  lastTimeS: number;
}

/** A weighting with nothing measured yet. */
export function createTimeWeightedLevel(weighting: TimeWeighting): TimeWeightedLevel {
  return { tauS: TIME_CONSTANT_S[weighting], meanSquare: Number.NaN, lastTimeS: Number.NaN };
}

/** Empties the weighting (a new run). */
export function resetTimeWeightedLevel(w: TimeWeightedLevel): void {
  w.meanSquare = Number.NaN;
  w.lastTimeS = Number.NaN;
}

/**
 * Adds a row: `meanSquare` held since the previous row's time up to `timeS`. A non-finite input
 * is skipped. The first row (or one after time ran backwards, a new run) starts the average
 * at its own value, as a meter switched on into a steady sound settles there.
 */
export function stepTimeWeightedLevel(w: TimeWeightedLevel, timeS: number, meanSquare: number): void {
  if (!Number.isFinite(meanSquare) || meanSquare < 0 || !Number.isFinite(timeS)) return;
  const dt = timeS - w.lastTimeS;
  if (!Number.isFinite(w.meanSquare) || !(dt >= 0)) {
    w.meanSquare = meanSquare;
  } else {
    const keep = Math.exp(-dt / w.tauS);
    w.meanSquare = w.meanSquare * keep + meanSquare * (1 - keep);
  }
  w.lastTimeS = timeS;
}

/** The weighted level in dB re the unit of the mean square (NaN when nothing was measured or it is zero). */
export function weightedLevelDb(w: TimeWeightedLevel): number {
  return w.meanSquare > 0 ? 10 * Math.log10(w.meanSquare) : Number.NaN;
}
