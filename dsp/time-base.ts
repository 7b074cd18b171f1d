/**
 * Time base of the streaming analysis (docs/DESIGN.md "Time base"): counts analysis samples
 * (after the conditioner's decimation) and maps an analysis index or an envelope index to
 * seconds of the input record, gaps included. The decimation filters and the envelope low-pass
 * are linear phase; their delays are subtracted so every time refers to the input.
 */

export interface TimeBase {
  /** Input sample rate, Hz. */
  readonly inputRateHz: number;
  /** Input samples per analysis sample, and the decimation chain's group delay, s. */
  readonly decimation: number;
  readonly conditionDelayS: number;
  /** Analysis samples per envelope sample, and the envelope filter's delay, s. */
  readonly envM: number;
  readonly envDelayS: number;
  /** Analysis samples produced (global index of the next one). */
  j: number;
  /** Analysis index jBase corresponds to input index inBase (gaps included). */
  jBase: number;
  inBase: number;
  /** Input samples pushed plus input samples signalled missing. */
  durationInputSamples: number;
}

export function createTimeBase(p: { inputRateHz: number; decimation: number; conditionDelayS: number; envM: number; envDelayS: number }): TimeBase {
  return { ...p, j: 0, jBase: 0, inBase: 0, durationInputSamples: 0 };
}

/** Time (s) of analysis sample j (fractional allowed), corrected for the decimation delay. */
export function timeOfJ(tb: TimeBase, j: number): number {
  return (tb.inBase + (j - tb.jBase + 1) * tb.decimation - 1) / tb.inputRateHz - tb.conditionDelayS;
}

/** Time (s) of global envelope sample g, corrected for the decimation and envelope delays. */
export function timeOfG(tb: TimeBase, g: number): number {
  return timeOfJ(tb, g * tb.envM + tb.envM - 1) - tb.envDelayS;
}

/** Analysis index (since the latest gap) at time t, s, rounded down. */
export function jAtTime(tb: TimeBase, analysisRateHz: number, timeS: number): number {
  return tb.jBase + Math.floor((timeS - timeOfJ(tb, tb.jBase)) * analysisRateHz);
}

/**
 * Starts a new time base after `missing` input samples: the next analysis index is aligned to
 * the envelope clock and maps to the input sample after the gap. Returns that index.
 */
export function rebaseAfterGap(tb: TimeBase, missing: number): number {
  tb.durationInputSamples += missing;
  const jNext = Math.ceil(tb.j / tb.envM) * tb.envM;
  tb.j = jNext;
  tb.jBase = jNext;
  tb.inBase = tb.durationInputSamples;
  return jNext;
}
