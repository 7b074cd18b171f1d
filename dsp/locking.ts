/**
 * Harmonic or mode, by envelope locking (docs/DESIGN.md "Harmonic or mode"). A line at k·f is a
 * harmonic of the tone at f when its envelope is locked to the tone's over the same stretch: its
 * log-amplitude rate is k times the tone's (the k-th harmonic of a waveform of amplitude A grows
 * as A^k while the waveform keeps its shape), and its phase turns k times as fast (its frequency
 * is k·f to within half a cycle over the stretch). A second duct mode near 2f has its own rate and
 * frequency, and stays a tone.
 */
import { studentTQuantile, Z_975 } from './stats';
import { addLinePoint, createLineSums, lineRss, lineSxx, lineSxy } from './line-fit';
import { phaseFrequency } from './segment-fit';
import { indexAtTime, topPowerIn, type ToneRuntime } from './tone-store';

/** Samples used for a rate stand this far (power ratio, 10 dB) over the band background. */
export const RATE_MIN_OVER_BG = 10;
/** Fewest samples for a log-amplitude slope. */
const SLOPE_MIN_SAMPLES = 8;
/** Rates are locked within this many combined standard deviations (two-sided 1 %). */
const LOCK_SD = 2.576;
/**
 * Least frequency tolerance of a lock, as a fraction of the harmonic's frequency: the 0.4 % by
 * which peak.ts already groups a frame's harmonics (drift within the stretch, phase noise).
 */
const LOCK_FRACTION = 0.004;

/** A log-amplitude rate with its standard deviation, 1/s (sd NaN when not known). */
export interface LogSlope {
  ratePerS: number;
  sdPerS: number;
  /** Samples used, and their first and last times relative to t0, s. */
  n: number;
  firstS: number;
  lastS: number;
}

/**
 * Straight line through ½ ln(A² − N²) of store entries [i0, i1) that stand RATE_MIN_OVER_BG over
 * the background (and below maxPower), times relative to t0 (common practice); its sd from the
 * residuals with the effective sample count 2·B·duration (as in dsp/fit.ts). NaN rate when too
 * few samples.
 */
export function logAmplitudeSlope(tr: ToneRuntime, i0: number, i1: number, t0: number, maxPower = Infinity): LogSlope {
  const line = createLineSums();
  let tFirst = Infinity;
  let tLast = -Infinity;
  for (let k = Math.max(0, i0); k < Math.min(i1, tr.n); k++) {
    const p = tr.power[k] - tr.bg[k];
    if (tr.clipped[k] || !(p > RATE_MIN_OVER_BG * tr.bg[k]) || !(tr.power[k] < maxPower)) continue;
    const t = tr.timeS[k] - t0;
    addLinePoint(line, t, 0.5 * Math.log(p), 1);
    if (t < tFirst) tFirst = t;
    if (t > tLast) tLast = t;
  }
  const n = line.n;
  const none = { ratePerS: Number.NaN, sdPerS: Number.NaN, n, firstS: tFirst, lastS: tLast };
  if (n < SLOPE_MIN_SAMPLES) return none;
  const sxx = lineSxx(line);
  if (!(sxx > 0)) return none;
  const slope = lineSxy(line) / sxx;
  const rss = lineRss(line, slope);
  const nEff = Math.min(n, 2 * tr.env.bandwidthHz * (tLast - tFirst));
  if (nEff < 3) return none;
  // sd of the slope, and its 95 % half-width with nEff − 2 degrees of freedom expressed as a normal sd.
  const sd = Math.sqrt((rss / (n - 2) / sxx) * (n / nEff));
  return { ratePerS: slope, sdPerS: (sd * studentTQuantile(0.975, nEff - 2)) / Z_975, n, firstS: tFirst, lastS: tLast };
}

/**
 * Whether store entries [i0, i1) of line `child` are locked as the k-th harmonic of the tone held
 * by one of `parents` over the same times. Unknown rates (too few samples clear of the background)
 * leave the decision to the frequency, and so does isRateFree: a growth that rises within a growth
 * of the tone, where the tone's knee changes the waveform's shape and A^k no longer holds.
 */
export function isLockedHarmonic(child: ToneRuntime, i0: number, i1: number, parents: ToneRuntime[], k: number, isRateFree = false): boolean {
  if (i1 <= i0) return false;
  const t0 = child.timeS[i0];
  const t1 = child.timeS[i1 - 1];
  const par = parents.find((p) => p.n > 0 && p.timeS[0] <= t0 && p.timeS[p.n - 1] >= t1);
  if (par === undefined) return false;
  // Phase is compared where the line stands within RATE_MIN_OVER_BG of its top: there it holds
  // its band (another line in the band, e.g. a noise-driven mode beside a rising harmonic, turns
  // the phase by at most asin(1/√10) = 0.32 rad), and a line rising through it does not.
  const top = topPowerIn(child, i0, i1);
  let iPh = i0;
  while (iPh < i1 - 1 && !(child.power[iPh] * RATE_MIN_OVER_BG >= top)) iPh++;
  const tPh = child.timeS[iPh];
  const j0 = indexAtTime(par, tPh);
  const j1 = indexAtTime(par, t1) + 1;
  // A tone not heard over its background there cannot hold a harmonic there.
  let isParentHeard = false;
  for (let j = j0; j < Math.min(j1, par.n) && !isParentHeard; j++) isParentHeard = !par.clipped[j] && par.power[j] - par.bg[j] > RATE_MIN_OVER_BG * par.bg[j];
  if (!isParentHeard) return false;
  const fc = phaseFrequency(child, iPh, i1);
  const fp = phaseFrequency(par, j0, j1);
  if (Number.isFinite(fc) && Number.isFinite(fp)) {
    // Half a cycle of relative phase over the stretch, or LOCK_FRACTION of the harmonic.
    const tol = Math.max(1 / (2 * Math.max(t1 - tPh, 1e-3)), LOCK_FRACTION * fc);
    if (Math.abs(fc - k * fp) > tol) return false;
  }
  if (isRateFree) return true;
  const rc = logAmplitudeSlope(child, i0, i1, t0);
  if (!Number.isFinite(rc.ratePerS)) return true;
  // The tone's rate over the very times the harmonic's rate was measured (the weaker harmonic
  // clears the background later: a knee inside the window would bend the two slopes differently).
  const rp = logAmplitudeSlope(par, indexAtTime(par, t0 + rc.firstS), indexAtTime(par, t0 + rc.lastS) + 1, t0);
  if (!Number.isFinite(rp.ratePerS)) return true;
  return Math.abs(rc.ratePerS - k * rp.ratePerS) <= LOCK_SD * Math.hypot(rc.sdPerS, k * rp.sdPerS);
}
