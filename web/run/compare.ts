/**
 * Before/after in plain words: the change in growth and decay rate between two sessions, with
 * its 95 % interval. The two estimates come from separate records, so they are independent and
 * the standard error of their difference is the root sum of squares of theirs
 * (REFERENCES.md §91): Δ = b − a, half-width h_Δ = √(h_a² + h_b²), where h is the half-width of
 * each 95 % interval (the same 1.96 factor cancels).
 */
import type { Interval, Summary } from '../../dsp/types';
import { decimalsFor, formatFixed, formatRate, isShowable, isShowableInterval } from '../format';

export interface RateChange {
  /** After minus before, 1/s. */
  deltaPerS: number;
  /** Half-width of the 95 % interval of the difference, 1/s (NaN when an interval is missing). */
  halfWidthPerS: number;
  /** True when the interval of the difference excludes zero. */
  isResolved: boolean;
}

function halfWidth(ci: Interval | null | undefined): number {
  return isShowableInterval(ci) ? Math.abs(ci[1] - ci[0]) / 2 : Number.NaN;
}

/** The difference of two independent estimates with their 95 % intervals (null when a value is missing). */
export function rateChange(before: number | null | undefined, beforeCi: Interval | null | undefined, after: number | null | undefined, afterCi: Interval | null | undefined): RateChange | null {
  if (!isShowable(before) || !isShowable(after)) return null;
  const hb = halfWidth(beforeCi);
  const ha = halfWidth(afterCi);
  const h = Math.hypot(hb, ha);
  const delta = after - before;
  return { deltaPerS: delta, halfWidthPerS: h, isResolved: Number.isFinite(h) && Math.abs(delta) > h };
}

/** "3.2 ± 0.4 1/s": decimals from the interval's first significant digit (one at least). */
export function formatChange(magnitude: number, halfWidthPerS: number): string {
  if (!Number.isFinite(halfWidthPerS)) return `${formatFixed(magnitude, Math.max(1, decimalsFor(magnitude, 2)))} 1/s (no interval)`;
  const d = Math.max(1, decimalsFor(halfWidthPerS, 1));
  return `${formatFixed(magnitude, d)} ± ${formatFixed(halfWidthPerS, d)} 1/s`;
}

function rateSentence(what: 'growth rate' | 'decay rate', before: number | null | undefined, beforeCi: Interval | null | undefined, after: number | null | undefined, afterCi: Interval | null | undefined): string | null {
  if (!isShowable(before) && !isShowable(after)) return null;
  if (!isShowable(after)) return `After: no ${what} measured (before: ${formatRate(before, beforeCi)}).`;
  if (!isShowable(before)) return `Before: no ${what} measured (after: ${formatRate(after, afterCi)}).`;
  const c = rateChange(before, beforeCi, after, afterCi);
  if (!c) return null;
  const span = `from ${formatRate(before, null)} to ${formatRate(after, null)}`;
  if (!c.isResolved) {
    return `The ${what} did not change beyond the measurement scatter: ${c.deltaPerS >= 0 ? '+' : ''}${formatChange(c.deltaPerS, c.halfWidthPerS)} (95 %), ${span}.`;
  }
  const verb = c.deltaPerS < 0 ? 'lowered' : 'raised';
  return `The change ${verb} the ${what} by ${formatChange(Math.abs(c.deltaPerS), c.halfWidthPerS)} (95 %), ${span}.`;
}

/**
 * The before/after sentences for two summaries: growth rate first (how hard the system hums),
 * then decay rate (how well it is damped once the driving stops).
 */
export function beforeAfterSentences(before: Summary | null | undefined, after: Summary | null | undefined): string[] {
  const out: string[] = [];
  const g = rateSentence('growth rate', before?.growthRatePerS, before?.growthRateCi95PerS, after?.growthRatePerS, after?.growthRateCi95PerS);
  const d = rateSentence('decay rate', before?.decayRatePerS, before?.decayRateCi95PerS, after?.decayRatePerS, after?.decayRateCi95PerS);
  if (g) out.push(g);
  if (d) out.push(d);
  if (!out.length) out.push('Neither session has a fitted growth or decay rate, so no change can be stated.');
  return out;
}
