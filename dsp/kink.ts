/**
 * Where an envelope turns: the change point of a continuous two-segment line through ln A²
 * (two-phase regression, Hinkley 1971, REFERENCES.md §31). A user marker ("driving off") is a hint
 * typed by hand, up to a reaction time away from the switch it records; the fits start from the
 * kink the data show near it. ln A² of an exponential envelope is a straight line, so a steady
 * level turning into a free decay (or a quiet background into a growth) is two lines meeting at the
 * kink. The envelope low-pass blurs the corner over one kernel, symmetrically (linear phase), so
 * the lines' meeting point stays on the kink.
 */

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
