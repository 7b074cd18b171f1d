/**
 * Line classification by envelope statistics (docs/DESIGN.md "Noise segments"): a growth or
 * decay that the band's own noise explains is quiet, not a hum.
 */
import { logSecondDifferenceMs, NOISE_D2, NOISE_TEST_LAG_S, ON_DB, STATE_DECAY, STATE_GROWTH, STATE_QUIET, type RegimeSegment } from './regime';
import { kthSmallest } from './stats';
import { topPowerIn, type ToneRuntime } from './tone-store';

/** Window either side of a growth or decay in which its noise level is judged, s, and how far above the spectral background that level may lie, dB. */
const NOISE_PAD_S = 1;
const NOISE_SPAN_DB = 20;

/** Quantile of the envelope power that estimates the band's own noise level (noiseMeanOfSamples). */
const NOISE_QUANTILE = 0.2;

/**
 * Mean of the noise power behind the first n samples of envelope power in `values`, robust to a
 * tone that holds up to 1 − NOISE_QUANTILE of them: the NOISE_QUANTILE-quantile (the value at
 * index ⌊NOISE_QUANTILE·n⌋ in sorted order) divided by −ln(1 − NOISE_QUANTILE), the power of
 * narrow-band Gaussian noise being exponentially distributed (common practice). Reorders `values`.
 */
function noiseMeanOfSamples(values: Float64Array, n: number): number {
  return kthSmallest(values, n, Math.floor(NOISE_QUANTILE * n)) / -Math.log(1 - NOISE_QUANTILE);
}

/**
 * Whether a growth or decay segment is noise, reading the store up to entry `limit` (exclusive).
 * The noise level around a segment is the band's own level where it is lowest: the 20th
 * percentile of the envelope power over the segment and NOISE_PAD_S either side, divided by
 * −ln 0.8 (A² of narrow-band noise is exponentially distributed). A segment whose top stays below
 * ON_DB over that level holds no tone beyond chance (P(A² > 16·mean) = e^−16 per correlation
 * time); the test applies only where that lowest level is itself within NOISE_SPAN_DB of the
 * spectral background, or where the envelope jumps about as noise does (dsp/regime.ts NOISE_D2).
 * Common practice for exponential envelope statistics.
 */
export function isNoiseSegment(tr: ToneRuntime, s: RegimeSegment, limit: number): boolean {
  const pad = Math.round(NOISE_PAD_S * tr.env.outputRateHz);
  const i0 = Math.max(tr.validFrom, s.startIdx - pad);
  const i1 = Math.min(tr.n, limit, s.endIdx + pad);
  const vals = new Float64Array(Math.max(0, i1 - i0));
  let count = 0;
  let bgSum = 0;
  let bgCount = 0;
  for (let k = i0; k < i1; k++) {
    if (tr.clipped[k]) continue;
    vals[count++] = tr.power[k];
    if (tr.bg[k] > 0) {
      bgSum += tr.bg[k];
      bgCount++;
    }
  }
  if (count < 8 || bgCount === 0) return false;
  const noiseMean = noiseMeanOfSamples(vals, count);
  if (!(noiseMean < 10 ** (NOISE_SPAN_DB / 10) * (bgSum / bgCount))) {
    // Far above the spectral background: noise only if the envelope jumps about as noise does
    // (a noise-driven resonance), not if it is smooth (a dip in a loud tone).
    const lag = Math.max(1, Math.round(NOISE_TEST_LAG_S * tr.env.outputRateHz));
    const d2 = logSecondDifferenceMs(tr.power, i0, i1, lag);
    if (!(d2 > NOISE_D2)) return false;
  }
  const top = topPowerIn(tr, s.startIdx, s.endIdx);
  return !(top > 10 ** (ON_DB / 10) * noiseMean);
}

/**
 * Segments that the noise test found to hold a tone, with the store span [startIdx, endIdx) it
 * read: the test depends on nothing else while the record stands still, so a later relabelling
 * tests again only the segments that are new or have moved (finish() relabels before and after
 * the transitions are classified, which moves a few segments and leaves the rest).
 */
export type ClearedSegments = Map<RegimeSegment, [startIdx: number, endIdx: number]>;

/**
 * Growth and decay segments of noise become quiet (isNoiseSegment), and neighbouring quiet
 * segments join. `cleared`, when given, is read and extended (ClearedSegments; the store must not
 * have grown since it was first filled); returns it.
 */
export function relabelNoiseSegments(tr: ToneRuntime, cleared: ClearedSegments = new Map()): ClearedSegments {
  const segs = tr.regime.segments;
  for (const s of segs) {
    if (s.state !== STATE_GROWTH && s.state !== STATE_DECAY) continue;
    const span = cleared.get(s);
    if (span !== undefined && span[0] === s.startIdx && span[1] === s.endIdx) continue;
    if (isNoiseSegment(tr, s, tr.processed)) {
      s.state = STATE_QUIET;
      s.isOnset = false;
      s.reachedSteady = false;
    } else cleared.set(s, [s.startIdx, s.endIdx]);
  }
  let w = 0;
  for (let r = 0; r < segs.length; r++) {
    const s = segs[r];
    if (w > 0 && s.state === STATE_QUIET && segs[w - 1].state === STATE_QUIET && segs[w - 1].endIdx === s.startIdx) {
      segs[w - 1].endIdx = s.endIdx;
      continue;
    }
    segs[w++] = s;
  }
  segs.length = w;
  return cleared;
}
