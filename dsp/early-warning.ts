/**
 * Early-warning indicators of an approaching hum (REFERENCES.md §12, §43): as the net damping of a
 * mode falls towards zero its envelope fluctuates more and forgets more slowly ("critical slowing
 * down"; Scheffer et al. 2009, Nature 461, 53–59), so the variance and the lag autocorrelation of
 * the envelope over a sliding window rise; the trend is scored by Kendall's τ of each indicator
 * against time (Dakos et al. 2012, PLoS ONE 7, e41010). For the linear normal form the two
 * indicators are σ²/(2|ν|) and e^{ν·lag}. Whole-series functions: they allocate; they never throw.
 */

export interface EarlyWarning {
  /** Centre time of each window, s (from the first sample). */
  timeS: Float64Array;
  /** Variance of the envelope amplitude within each window (unit²). */
  variance: Float64Array;
  /** Autocorrelation of the envelope amplitude at `lagS` within each window. */
  autocorrelation: Float64Array;
  lagS: number;
  /** Kendall's τ-b of variance and of autocorrelation against time (−1 … 1; NaN with fewer than 3 windows). */
  varianceTrend: number;
  autocorrelationTrend: number;
}

/** Window and lag defaults: 5 s windows at 50 % overlap (REFERENCES.md §12), lag 10 ms (a tenth of the correlation time at ν = −10 1/s, so the indicator moves over the whole stable range). */
export const EARLY_WARNING_WINDOW_S = 5;
export const EARLY_WARNING_LAG_S = 0.01;

/**
 * Kendall's τ-b of y against its order (time), ties corrected (Kendall 1938; REFERENCES.md §43).
 * O(n²): meant for tens to hundreds of windows.
 */
export function kendallTau(y: ArrayLike<number>): number {
  const n = y.length;
  if (n < 3) return Number.NaN;
  let concordant = 0;
  let discordant = 0;
  let tiesY = 0;
  for (let i = 0; i < n; i++) {
    for (let j = i + 1; j < n; j++) {
      const d = y[j] - y[i];
      if (d > 0) concordant++;
      else if (d < 0) discordant++;
      else tiesY++;
    }
  }
  const pairs = (n * (n - 1)) / 2;
  // Time has no ties; the y ties shrink the denominator (τ-b).
  return (concordant - discordant) / Math.sqrt(pairs * (pairs - tiesY));
}

/**
 * Variance and lag autocorrelation of an envelope amplitude series (sampled at rateHz) over sliding
 * windows of windowS with 50 % overlap, each window's mean removed, and their Kendall τ trends.
 */
export function earlyWarningIndicators(
  amplitude: ArrayLike<number>,
  rateHz: number,
  opts: { windowS?: number; lagS?: number } = {},
): EarlyWarning {
  const windowS = opts.windowS ?? EARLY_WARNING_WINDOW_S;
  const lagS = opts.lagS ?? EARLY_WARNING_LAG_S;
  const w = Math.max(4, Math.round(windowS * rateHz));
  const hop = Math.max(1, Math.floor(w / 2));
  const lag = Math.max(1, Math.round(lagS * rateHz));
  const count = amplitude.length >= w && lag < w / 2 ? Math.floor((amplitude.length - w) / hop) + 1 : 0;
  const timeS = new Float64Array(count);
  const variance = new Float64Array(count);
  const autocorrelation = new Float64Array(count);
  for (let k = 0; k < count; k++) {
    const a = k * hop;
    let mean = 0;
    for (let i = a; i < a + w; i++) mean += amplitude[i] / w;
    let c0 = 0;
    let cl = 0;
    for (let i = a; i < a + w; i++) {
      const d = amplitude[i] - mean;
      c0 += d * d;
      if (i + lag < a + w) cl += d * (amplitude[i + lag] - mean);
    }
    timeS[k] = (a + w / 2) / rateHz;
    variance[k] = c0 / w;
    autocorrelation[k] = c0 > 0 ? cl / c0 : Number.NaN;
  }
  return { timeS, variance, autocorrelation, lagS: lag / rateHz, varianceTrend: kendallTau(variance), autocorrelationTrend: kendallTau(autocorrelation) };
}
