/**
 * Where an envelope turns: the change point of a continuous two-segment line through ln A²
 * (two-phase regression, Hinkley 1971, REFERENCES.md §31). A user marker ("driving off") is a hint
 * typed by hand, up to a reaction time away from the switch it records; the fits start from the
 * kink the data show near it. ln A² of an exponential envelope is a straight line, so a steady
 * level turning into a free decay (or a quiet background into a growth) is two lines meeting at the
 * kink. The envelope low-pass blurs the corner over one kernel, symmetrically (linear phase), so
 * the lines' meeting point stays on the kink.
 */

import type { RegimeSegment } from './regime';
import { contiguousEnd, meanBg, meanPower, type ToneRuntime } from './tone-store';
import type { Marker } from './types';

/** Search half-width around a marker, s: twice a slow human reaction to a switch (0.5 s; common practice). */
export const MARKER_SEARCH_S = 1;

/** Result of findKink: the store index of the change point and the two slopes (1/s of ln A², i.e. 2 × rate). */
export interface Kink {
  index: number;
  timeS: number;
  slopeBefore: number;
  slopeAfter: number;
}

/**
 * Least-squares fit of y = a + b1·min(t − tk, 0) + b2·max(t − tk, 0) to y = ln(power − background)
 * over store entries [i0, i1) (entries with power ≤ background·floorRatio are left out: there the
 * background, not the tone, sets the level), with tk searched over the entries in [s0, s1) that
 * leave at least minSide usable entries on each side. Returns null when no candidate qualifies.
 * Whole-record use (finish); allocates nothing.
 */
export function findKink(
  timeS: Float64Array,
  power: Float32Array | Float64Array,
  range: { i0: number; i1: number; s0: number; s1: number; minSide: number; backgroundPower: number; floorRatio: number },
): Kink | null {
  const { i0, i1, minSide, backgroundPower } = range;
  const floor = backgroundPower * range.floorRatio;
  const usable = (k: number): boolean => power[k] > floor && power[k] - backgroundPower > 0;
  let best: Kink | null = null;
  let bestRss = Infinity;
  const t0 = timeS[i0];
  for (let c = Math.max(range.s0, i0); c < Math.min(range.s1, i1); c++) {
    if (!usable(c)) continue;
    const tk = timeS[c] - t0;
    // Normal equations of [1, u, v] with u = min(t − tk, 0), v = max(t − tk, 0).
    let n = 0;
    let nBefore = 0;
    let nAfter = 0;
    let su = 0;
    let sv = 0;
    let suu = 0;
    let svv = 0;
    let sy = 0;
    let suy = 0;
    let svy = 0;
    let syy = 0;
    for (let k = i0; k < i1; k++) {
      if (!usable(k)) continue;
      const d = timeS[k] - t0 - tk;
      const y = Math.log(power[k] - backgroundPower);
      const u = d < 0 ? d : 0;
      const v = d > 0 ? d : 0;
      n++;
      if (d < 0) nBefore++;
      else if (d > 0) nAfter++;
      su += u;
      sv += v;
      suu += u * u;
      svv += v * v;
      sy += y;
      suy += u * y;
      svy += v * y;
      syy += y * y;
    }
    if (nBefore < minSide || nAfter < minSide) continue;
    // Solve the 3×3 system (u·v = 0 everywhere, so the off-diagonal u–v term vanishes).
    const m00 = n;
    const m01 = su;
    const m02 = sv;
    const m11 = suu;
    const m22 = svv;
    const det = m00 * (m11 * m22) - m01 * (m01 * m22) + m02 * (-m11 * m02);
    if (!(Math.abs(det) > 0)) continue;
    const a = (sy * (m11 * m22) - m01 * (suy * m22) + m02 * (-m11 * svy)) / det;
    const b1 = (m00 * (suy * m22) - sy * (m01 * m22) + m02 * (m01 * svy - suy * m02)) / det;
    const b2 = (m00 * (m11 * svy) - m01 * (m01 * svy - suy * m02) + sy * (-m11 * m02)) / det;
    const rss = syy - 2 * (a * sy + b1 * suy + b2 * svy) + a * a * n + b1 * b1 * suu + b2 * b2 * svv + 2 * a * (b1 * su + b2 * sv);
    if (rss < bestRss) {
      bestRss = rss;
      best = { index: c, timeS: timeS[c], slopeBefore: b1, slopeAfter: b2 };
    }
  }
  return best;
}

/** Power ratio over the background down to which the two lines hold (10 dB: the background bends ln(A² − N²) by under 0.5 dB there). */
const KINK_FLOOR_RATIO = 10;

/**
 * Store index where a decay near a 'driving-off' marker begins: the kink of the envelope within
 * MARKER_SEARCH_S of the marker, between the start of the stretch before the decay and where the
 * decay meets the background. Adds a warning when marker and data disagree by more than the
 * envelope's resolution (one kernel of the band searched); with no kink found the marker stands.
 */
export function decayStartNearMarker(
  tr: ToneRuntime,
  seg: RegimeSegment,
  prev: RegimeSegment | null,
  mk: Marker,
  isWide: boolean,
  warnings: string[],
): number {
  const rate = tr.env.outputRateHz;
  const src = isWide ? tr.powerWide : tr.power;
  let m = seg.startIdx;
  while (m > 0 && tr.timeS[m] > mk.timeS) m--;
  while (m < tr.processed - 1 && tr.timeS[m] < mk.timeS) m++;
  const markerIdx = Math.min(m, seg.endIdx - 1);
  const reach = Math.round(MARKER_SEARCH_S * rate);
  const lo = Math.max(prev !== null ? prev.startIdx : seg.startIdx, tr.validFrom, m - reach);
  // Background from the quiet after the decay (as the decay fit takes it), else the band's.
  const after = meanPower(tr, seg.endIdx + Math.round(0.2 * rate), seg.endIdx + Math.round(2 * rate), Math.round(0.1 * rate), isWide);
  const bg = Number.isFinite(after) ? after : meanBg(tr, seg.startIdx, seg.endIdx) * (isWide ? tr.env.wideBandwidthHz / tr.env.bandwidthHz : 1);
  if (!(bg > 0)) return markerIdx;
  let hi = Math.max(lo, seg.startIdx);
  const stop = Math.min(tr.processed, m + reach);
  while (hi < stop && src[hi] > bg * KINK_FLOOR_RATIO) hi++;
  hi = contiguousEnd(tr, lo, hi - lo, hi);
  // Each line needs half a kernel beyond the blurred corner; the kink is placed late by under half
  // a kernel on a fast decay (tests/dsp/kink.test.ts), so a marker on time stays within one kernel.
  const kLen = isWide ? tr.env.wideLength : tr.env.kernelLength;
  const kink = findKink(tr.timeS, src, {
    i0: lo,
    i1: hi,
    s0: Math.max(lo, m - reach),
    s1: Math.min(hi, m + reach),
    minSide: Math.ceil(kLen / 2),
    backgroundPower: bg,
    floorRatio: KINK_FLOOR_RATIO,
  });
  if (kink === null || !(kink.slopeAfter < kink.slopeBefore)) return markerIdx;
  if (Math.abs(kink.timeS - mk.timeS) > kLen / rate) {
    warnings.push(`marker "${mk.label}" at ${mk.timeS.toFixed(2)} s: the envelope turns at ${kink.timeS.toFixed(2)} s; the decay is fitted from there`);
  }
  return kink.index;
}
