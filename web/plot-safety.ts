/**
 * What keeps a plot sane whatever the data: axis ranges that are finite, not empty and not absurdly
 * wide (constant, empty, non-finite or 1e308-wide data all give a usable range, so axis code never
 * loops over billions of ticks), and marker labels laid out in rows so they never overprint.
 */

export interface RangeOptions {
  /** Range used when there is no finite data. */
  fallback: [number, number];
  /** Narrowest span shown (constant data is centred in it). */
  minSpan: number;
  /** Widest span shown below the highest value (dB plots: silence at −300 dBFS does not squash the view). */
  maxSpan?: number;
  /** Values beyond ±limit are treated as not finite (default 1e12). */
  limit?: number;
  /** Fraction of the span added on each side (default 0.05). */
  pad?: number;
}

/** A finite, non-empty, bounded axis range for data spanning [lo, hi] (either may be null/NaN). */
export function safeRange(lo: number | null | undefined, hi: number | null | undefined, o: RangeOptions): [number, number] {
  const limit = o.limit ?? 1e12;
  const ok = (v: number | null | undefined): v is number => typeof v === 'number' && Number.isFinite(v) && Math.abs(v) <= limit;
  let a = ok(lo) ? lo : null;
  let b = ok(hi) ? hi : null;
  if (a === null && b === null) return [o.fallback[0], o.fallback[1]];
  if (a === null) a = b as number;
  if (b === null) b = a;
  if (a > b) [a, b] = [b, a];
  if (o.maxSpan !== undefined && b - a > o.maxSpan) a = b - o.maxSpan;
  if (b - a < o.minSpan) {
    const mid = (a + b) / 2;
    a = mid - o.minSpan / 2;
    b = mid + o.minSpan / 2;
  }
  const pad = (b - a) * (o.pad ?? 0.05);
  return [a - pad, b + pad];
}

/** Lowest and highest finite value of a series (nulls and non-finite values skipped); [NaN, NaN] when none. */
export function finiteExtent(values: ArrayLike<number | null>, limit = 1e12): [number, number] {
  let lo = Infinity;
  let hi = -Infinity;
  for (let i = 0; i < values.length; i++) {
    const v = values[i];
    if (typeof v !== 'number' || !Number.isFinite(v) || Math.abs(v) > limit) continue;
    if (v < lo) lo = v;
    if (v > hi) hi = v;
  }
  return lo <= hi ? [lo, hi] : [Number.NaN, Number.NaN];
}

/**
 * Rows for labels at positions `xs` (left edges, px) with widths `widths` (px), in the order given:
 * each label takes the first row where it clears the previous label by `gap`; a label that fits in
 * none of `rows` rows gets null (draw its line without a label: the marker list names it).
 */
export function layoutLabels(xs: readonly number[], widths: readonly number[], rows: number, gap: number): (number | null)[] {
  const rightEdge: number[] = new Array<number>(Math.max(0, rows)).fill(-Infinity);
  const order = xs.map((x, k) => ({ x, k })).sort((p, q) => p.x - q.x);
  const out: (number | null)[] = new Array<number | null>(xs.length).fill(null);
  for (const { x, k } of order) {
    if (!Number.isFinite(x)) continue;
    for (let r = 0; r < rows; r++) {
      if (x >= (rightEdge[r] ?? Infinity) + gap) {
        out[k] = r;
        rightEdge[r] = x + (widths[k] ?? 0);
        break;
      }
    }
  }
  return out;
}
