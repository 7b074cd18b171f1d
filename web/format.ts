/**
 * Number, unit and interval formatting for every screen of the app.
 * Each function returns text that carries its unit and, when given, the 95 % interval.
 * A missing or non-finite value never prints as NaN/undefined/Infinity: it prints a dash and a reason.
 */
import type { Interval } from '../dsp/types';

/** The dash shown in place of a value that is not available. */
export const MISSING = '—';

/** Typographic minus (U+2212), easier to read than a hyphen next to numbers. */
const MINUS = '−';

/** True for a number that can be shown (finite, not NaN). */
export function isShowable(value: number | null | undefined): value is number {
  return typeof value === 'number' && Number.isFinite(value);
}

/** The dash with its reason in parentheses, e.g. "— (no tone)". */
export function formatMissing(reason: string): string {
  return reason ? `${MISSING} (${reason})` : MISSING;
}

/**
 * Decimals needed to show `value` with `significant` significant digits (0 to 6).
 * Example: 0.00468 with 3 significant digits needs 5 decimals.
 */
export function decimalsFor(value: number, significant: number): number {
  if (!isShowable(value) || value === 0) return Math.max(0, significant - 1);
  // The small nudge keeps values such as (4.51 − 4.49)/2 = 0.00999… from counting as a decade lower.
  const magnitude = Math.floor(Math.log10(Math.abs(value)) + 1e-9);
  return Math.min(6, Math.max(0, significant - 1 - magnitude));
}

/** A number with a fixed count of decimals and a typographic minus; "−0.0" prints as "0.0". */
export function formatFixed(value: number, decimals: number): string {
  const text = value.toFixed(decimals);
  if (/^-0(\.0*)?$/.test(text)) return text.slice(1);
  return text.startsWith('-') ? MINUS + text.slice(1) : text;
}

/** True when an interval exists and both ends can be shown. */
export function isShowableInterval(ci: Interval | null | undefined): ci is Interval {
  return Array.isArray(ci) && ci.length === 2 && isShowable(ci[0]) && isShowable(ci[1]);
}

/**
 * A 95 % interval "(95 % CI 7.6–8.6)". With a negative end the en dash would be ambiguous,
 * so "to" is used instead: "(95 % CI −8.6 to −7.6)". Empty string when the interval is missing.
 */
export function formatInterval(ci: Interval | null | undefined, decimals: number): string {
  if (!isShowableInterval(ci)) return '';
  const low = Math.min(ci[0], ci[1]);
  const high = Math.max(ci[0], ci[1]);
  const lowText = formatFixed(low, decimals);
  const highText = formatFixed(high, decimals);
  const joiner = low < 0 || high < 0 ? ' to ' : '–';
  return `(95 % CI ${lowText}${joiner}${highText})`;
}

interface QuantityOptions {
  /** Significant digits of the value (default 3). */
  significant?: number;
  /** Fixed decimals, overriding `significant`. */
  decimals?: number;
  /** Shown when the value is missing (default "not measured"). */
  reason?: string;
}

/**
 * A value with its unit and optional interval: "8.1 1/s (95 % CI 7.6–8.6)".
 * The interval uses the same decimals as the value, so its digits line up with it.
 */
export function formatQuantity(
  value: number | null | undefined,
  unit: string,
  ci?: Interval | null,
  options: QuantityOptions = {},
): string {
  if (!isShowable(value)) return formatMissing(options.reason ?? 'not measured');
  const decimals = options.decimals ?? decimalsFor(value, options.significant ?? 3);
  const number = formatFixed(value, decimals);
  const main = unit ? `${number} ${unit}` : number;
  const interval = formatInterval(ci, decimals);
  return interval ? `${main} ${interval}` : main;
}

/**
 * A rate in 1/s (growth positive, decay given as a positive decay rate), with its interval:
 * formatRate(8.1, [7.6, 8.6]) → "8.10 1/s (95 % CI 7.60–8.60)". Three significant digits, at least
 * one decimal; a narrow interval gets up to two more decimals so that its ends differ:
 * formatRate(4.5, [4.499, 4.501]) → "4.500 1/s (95 % CI 4.499–4.501)".
 */
export function formatRate(ratePerS: number | null | undefined, ci95?: Interval | null, reason = 'no fit yet'): string {
  if (!isShowable(ratePerS)) return formatMissing(reason);
  let decimals = Math.max(1, decimalsFor(ratePerS, 3));
  // A narrow interval gets up to two more decimals, so its two ends do not print alike.
  if (isShowableInterval(ci95)) {
    const halfWidth = Math.abs(ci95[1] - ci95[0]) / 2;
    if (halfWidth > 0) decimals = Math.min(decimals + 2, Math.max(decimals, decimalsFor(halfWidth, 1)));
  }
  return formatQuantity(ratePerS, '1/s', ci95, { decimals });
}

/** A frequency in Hz: one decimal below 10 kHz ("170.3 Hz"), whole hertz above. */
export function formatHz(freqHz: number | null | undefined, ci95?: Interval | null, reason = 'no tone'): string {
  if (!isShowable(freqHz)) return formatMissing(reason);
  return formatQuantity(freqHz, 'Hz', ci95, { decimals: Math.abs(freqHz) < 10_000 ? 1 : 0 });
}

/** The level units the app shows. */
export type DbUnit = 'dBFS' | 'dB SPL' | 'dB(A)' | 'dB' | 'dB/s';

/** A level in decibels with one decimal: formatDb(-23.46, 'dBFS') → "−23.5 dBFS". */
export function formatDb(db: number | null | undefined, unit: DbUnit = 'dB', ci95?: Interval | null, reason = 'no signal'): string {
  if (!isShowable(db)) return formatMissing(reason);
  return formatQuantity(db, unit, ci95, { decimals: 1 });
}

/**
 * Decimals for a value with three significant digits, plus up to two more when its interval is so
 * narrow that its ends would print alike (as formatRate does).
 */
function decimalsWithInterval(value: number, ci95: Interval | null | undefined): number {
  const decimals = decimalsFor(value, 3);
  if (!isShowableInterval(ci95)) return decimals;
  const halfWidth = Math.abs(ci95[1] - ci95[0]) / 2;
  return halfWidth > 0 ? Math.min(decimals + 2, Math.max(decimals, decimalsFor(halfWidth, 1))) : decimals;
}

/** A dimensionless ratio (damping ratio) with three significant digits: "0.00468 (95 % CI 0.00401–0.00535)". */
export function formatRatio(ratio: number | null | undefined, ci95?: Interval | null, reason = 'no decay fit'): string {
  if (!isShowable(ratio)) return formatMissing(reason);
  return formatQuantity(ratio, '', ci95, { decimals: decimalsWithInterval(ratio, ci95) });
}

/** Quality factor Q (dimensionless), three significant digits, no decimals above 100: "107 (95 % CI 92–128)". */
export function formatQ(q: number | null | undefined, ci95?: Interval | null, reason = 'no decay fit'): string {
  if (!isShowable(q)) return formatMissing(reason);
  return formatQuantity(q, '', ci95, { decimals: decimalsWithInterval(q, ci95) });
}

/** A duration in seconds: "1.38 s"; below 1 s in milliseconds: "139 ms". */
export function formatSeconds(timeS: number | null | undefined, ci95?: Interval | null, reason = 'not measured'): string {
  if (!isShowable(timeS)) return formatMissing(reason);
  if (Math.abs(timeS) < 1 && timeS !== 0) {
    const ciMs: Interval | null = isShowableInterval(ci95) ? [ci95[0] * 1000, ci95[1] * 1000] : null;
    return formatQuantity(timeS * 1000, 'ms', ciMs, { significant: 3 });
  }
  return formatQuantity(timeS, 's', ci95, { significant: 3 });
}

/**
 * A long duration in the largest fitting unit: "8.0 h", "15 min", "2.5 min", "42 s" (one decimal
 * below ten units, none above; no interval). Below 1 s it defers to formatSeconds ("139 ms").
 */
export function formatDuration(timeS: number | null | undefined, reason = 'not known'): string {
  if (!isShowable(timeS)) return formatMissing(reason);
  const abs = Math.abs(timeS);
  // Units switch where the rounded value would reach the next unit (59.7 min reads "1.0 h", not "60 min").
  if (Math.round(abs / 60) >= 60) return formatQuantity(timeS / 3600, 'h', null, { decimals: abs >= 36_000 ? 0 : 1 });
  if (Math.round(abs) >= 60) return formatQuantity(timeS / 60, 'min', null, { decimals: abs >= 600 ? 0 : 1 });
  if (abs >= 1) return formatQuantity(timeS, 's', null, { significant: 2 });
  return formatSeconds(timeS, null, reason);
}

/** A clock-style position in a recording: 75.25 → "1:15.3" (minutes:seconds.tenths). */
export function formatClock(timeS: number | null | undefined): string {
  if (!isShowable(timeS)) return MISSING;
  const sign = timeS < 0 ? MINUS : '';
  const tenths = Math.round(Math.abs(timeS) * 10);
  if (!isShowable(tenths)) return MISSING;
  const minutes = Math.floor(tenths / 600);
  const seconds = (tenths - minutes * 600) / 10;
  return `${sign}${minutes}:${seconds < 10 ? '0' : ''}${seconds.toFixed(1)}`;
}

/** A percentage with the given decimals: "42 %". */
export function formatPercent(fraction: number | null | undefined, decimals = 0, reason = 'not known'): string {
  const percent = isShowable(fraction) ? fraction * 100 : Number.NaN;
  if (!isShowable(percent)) return formatMissing(reason);
  return `${formatFixed(percent, decimals)} %`;
}

/**
 * A pressure in pascals with three significant digits, in mPa below 0.1 Pa and kPa from 1000 Pa:
 * formatPa(0.0421) → "42.1 mPa", formatPa(3.2) → "3.20 Pa".
 */
export function formatPa(pa: number | null | undefined, reason = 'no signal'): string {
  if (!isShowable(pa)) return formatMissing(reason);
  const abs = Math.abs(pa);
  if (abs !== 0 && abs < 0.1) return formatQuantity(pa * 1000, 'mPa', null, { significant: 3 });
  if (abs >= 1000) return formatQuantity(pa / 1000, 'kPa', null, { significant: 3 });
  return formatQuantity(pa, 'Pa', null, { significant: 3 });
}
