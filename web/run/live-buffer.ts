/**
 * Ring buffer of the live track for the views: frames arrive with worker updates, the plots read
 * it on requestAnimationFrame. Capacity is fixed at creation; the oldest rows are overwritten.
 * A gap in the input is stored as a row of NaN so the plots break the line there.
 */
import type { Marker, Segment, TrackFrame } from '../../dsp/types';
import type { SpectrogramColumn } from '../worker/protocol';

/**
 * Most spectrogram columns held. When full, every second column is dropped, so a long record
 * keeps its whole span at a coarser time step (10 columns/s for the first 6 minutes).
 */
export const MAX_COLUMNS = 3600;

export interface LiveBuffer {
  readonly capacity: number;
  timeS: Float64Array;
  frequencyHz: Float64Array;
  amplitudeDbfs: Float64Array;
  levelDbfs: Float64Array;
  /** Rows written in total (the ring holds the last `capacity` of them). */
  written: number;
  segments: Segment[];
  markers: Marker[];
  /** Times of the first frame after each gap, s. */
  gapTimesS: number[];
  spectrumDbfs: Float32Array | null;
  spectrumBinHz: number;
  /** Spectra received so far. */
  spectrumCount: number;
  /** Spectrogram columns in time order, and the band their rows span, Hz. */
  columns: SpectrogramColumn[];
  columnBandHz: [number, number];
  /** A moment the user picked (spectrum of that moment), s, or NaN. */
  chosenTimeS: number;
  /** Bumped on every change, so a view can skip drawing when nothing changed. */
  version: number;
}

/** Creates a buffer for `capacity` rows (about 100 rows per second of track). */
export function createLiveBuffer(capacity: number): LiveBuffer {
  if (!(capacity >= 2)) throw new RangeError(`capacity must be at least 2 (got ${capacity})`);
  return {
    capacity,
    timeS: new Float64Array(capacity),
    frequencyHz: new Float64Array(capacity),
    amplitudeDbfs: new Float64Array(capacity),
    levelDbfs: new Float64Array(capacity),
    written: 0,
    segments: [],
    markers: [],
    gapTimesS: [],
    spectrumDbfs: null,
    spectrumBinHz: 0,
    spectrumCount: 0,
    columns: [],
    columnBandHz: [20, 4000],
    chosenTimeS: Number.NaN,
    version: 0,
  };
}

/** Empties the buffer for a new run. */
export function resetLiveBuffer(b: LiveBuffer): void {
  b.written = 0;
  b.segments = [];
  b.markers = [];
  b.gapTimesS = [];
  b.spectrumDbfs = null;
  b.spectrumBinHz = 0;
  b.spectrumCount = 0;
  b.columns = [];
  b.chosenTimeS = Number.NaN;
  b.version++;
}

/** Appends spectrogram columns, thinning the held ones by half whenever MAX_COLUMNS is reached. */
export function appendColumns(b: LiveBuffer, columns: readonly SpectrogramColumn[], bandHz: [number, number]): void {
  if (!columns.length) return;
  b.columnBandHz = bandHz;
  for (const c of columns) {
    b.columns.push(c);
    if (b.columns.length >= MAX_COLUMNS) b.columns = b.columns.filter((_, k) => k % 2 === 0);
  }
  b.version++;
}

/** Index of the column nearest to `timeS` (−1 when there is none). */
export function columnAt(b: LiveBuffer, timeS: number): number {
  const cs = b.columns;
  if (!cs.length || !Number.isFinite(timeS)) return -1;
  let lo = 0;
  let hi = cs.length - 1;
  while (lo < hi) {
    const mid = (lo + hi) >> 1;
    if ((cs[mid]?.timeS ?? 0) < timeS) lo = mid + 1;
    else hi = mid;
  }
  if (lo > 0 && Math.abs((cs[lo - 1]?.timeS ?? 0) - timeS) < Math.abs((cs[lo]?.timeS ?? 0) - timeS)) return lo - 1;
  return lo;
}

function writeRow(b: LiveBuffer, timeS: number, freqHz: number, ampDbfs: number, levelDbfs: number): void {
  const i = b.written % b.capacity;
  b.timeS[i] = timeS;
  b.frequencyHz[i] = freqHz;
  b.amplitudeDbfs[i] = ampDbfs;
  b.levelDbfs[i] = levelDbfs;
  b.written++;
}

/** Appends frames; a frame after a gap is preceded by a NaN row so lines do not join across it. */
export function appendFrames(b: LiveBuffer, frames: readonly TrackFrame[]): void {
  for (const f of frames) {
    if (f.isAfterGap && b.written > 0) {
      writeRow(b, f.timeS, Number.NaN, Number.NaN, Number.NaN);
      b.gapTimesS.push(f.timeS);
    }
    writeRow(b, f.timeS, f.frequencyHz, f.amplitudeDbfs, f.levelDbfs);
  }
  if (frames.length) b.version++;
}

/** Number of rows currently held. */
export function rowCount(b: LiveBuffer): number {
  return Math.min(b.written, b.capacity);
}

/** Index into the typed arrays of the k-th held row (0 = oldest). */
export function rowIndex(b: LiveBuffer, k: number): number {
  const start = b.written > b.capacity ? b.written % b.capacity : 0;
  return (start + k) % b.capacity;
}

/** Time of the newest row, s (0 when empty). */
export function latestTimeS(b: LiveBuffer): number {
  return b.written ? b.timeS[(b.written - 1) % b.capacity] ?? 0 : 0;
}

/** First held row (0 = oldest) whose time is at or after `timeS` (rowCount when none): rows are in time order. */
export function firstRowAtOrAfter(b: LiveBuffer, timeS: number): number {
  let lo = 0;
  let hi = rowCount(b);
  while (lo < hi) {
    const mid = (lo + hi) >> 1;
    if ((b.timeS[rowIndex(b, mid)] ?? 0) < timeS) lo = mid + 1;
    else hi = mid;
  }
  return lo;
}

/**
 * Straight line in dB for a fitted growth or decay segment: level(t) = interceptDb + slopeDbPerS·(t − startS),
 * slope = 20·log10(e)·rate = 8.685890·rate dB/s (REFERENCES.md §5). The intercept is the mean offset of the
 * track from that slope over the rows used: for growth, those more than 6 dB under the segment's top (the
 * exponential part, before saturation bends it); for decay, all rows. Null when no row fits. Reads only the
 * segment's own rows (found by bisection), so drawing many segments costs their length, not the buffer's.
 */
export function fitLineOf(b: LiveBuffer, seg: Segment): { startS: number; endS: number; interceptDb: number; slopeDbPerS: number } | null {
  if (seg.ratePerS === null || !Number.isFinite(seg.ratePerS)) return null;
  const slope = 8.68588963806504 * seg.ratePerS;
  const k0 = firstRowAtOrAfter(b, seg.startS);
  const n = rowCount(b);
  let top = Number.NEGATIVE_INFINITY;
  let k1 = k0;
  for (; k1 < n; k1++) {
    const i = rowIndex(b, k1);
    const t = b.timeS[i] ?? 0;
    if (t > seg.endS) break;
    const a = b.amplitudeDbfs[i] ?? Number.NaN;
    if (Number.isFinite(a) && a > top) top = a;
  }
  if (!Number.isFinite(top)) return null;
  const limit = seg.kind === 'growth' ? top - 6 : Number.POSITIVE_INFINITY;
  let sum = 0;
  let count = 0;
  let lastUsedS = seg.startS;
  for (let k = k0; k < k1; k++) {
    const i = rowIndex(b, k);
    const t = b.timeS[i] ?? 0;
    const a = b.amplitudeDbfs[i] ?? Number.NaN;
    if (!Number.isFinite(a) || a > limit) continue;
    sum += a - slope * (t - seg.startS);
    count++;
    if (t > lastUsedS) lastUsedS = t;
  }
  if (count === 0) return null;
  return { startS: seg.startS, endS: seg.kind === 'growth' ? lastUsedS : seg.endS, interceptDb: sum / count, slopeDbPerS: slope };
}

/** Held rows reduced for a plot `columns` pixels wide: per column the rows holding each series' extremes. */
export interface TrackOverview {
  timeS: number[];
  amplitudeDbfs: (number | null)[];
  levelDbfs: (number | null)[];
  frequencyHz: (number | null)[];
}

/**
 * The rows from `fromS` on, reduced to at most about 4 per pixel column (uPlot's habit: min and max
 * per column, so a spike or a dip stays visible): in each column the rows holding the lowest and
 * highest tone amplitude and the lowest and highest level are kept, in time order, and a gap row
 * (NaN) is always kept so lines break there. Values at or below `floorDbfs` become null (not drawn).
 * Time is made strictly increasing (a gap row shares the time of the frame after it).
 */
export function trackOverview(b: LiveBuffer, fromS: number, columns: number, floorDbfs: number): TrackOverview {
  const out: TrackOverview = { timeS: [], amplitudeDbfs: [], levelDbfs: [], frequencyHz: [] };
  const n = rowCount(b);
  const k0 = firstRowAtOrAfter(b, fromS);
  if (k0 >= n) return out;
  const t0 = b.timeS[rowIndex(b, k0)] ?? 0;
  const t1 = b.timeS[rowIndex(b, n - 1)] ?? 0;
  const perColumnS = Math.max(1e-9, (t1 - t0) / Math.max(1, columns));
  const db = (v: number): number | null => (Number.isFinite(v) && v > floorDbfs ? v : null);
  const push = (k: number): void => {
    const i = rowIndex(b, k);
    const t = b.timeS[i] ?? 0;
    const last = out.timeS.length ? (out.timeS[out.timeS.length - 1] ?? 0) : Number.NEGATIVE_INFINITY;
    out.timeS.push(t <= last ? last + 1e-6 : t);
    out.amplitudeDbfs.push(db(b.amplitudeDbfs[i] ?? Number.NaN));
    out.levelDbfs.push(db(b.levelDbfs[i] ?? Number.NaN));
    const f = b.frequencyHz[i] ?? Number.NaN;
    out.frequencyHz.push(Number.isFinite(f) ? f : null);
  };
  const picks: number[] = [];
  let k = k0;
  while (k < n) {
    const column = (kk: number): number => Math.floor(((b.timeS[rowIndex(b, kk)] ?? 0) - t0) / perColumnS);
    const col = column(k);
    let aMin = -1;
    let aMax = -1;
    let lMin = -1;
    let lMax = -1;
    picks.length = 0;
    for (; k < n; k++) {
      const i = rowIndex(b, k);
      if (column(k) !== col) break;
      const a = b.amplitudeDbfs[i] ?? Number.NaN;
      const l = b.levelDbfs[i] ?? Number.NaN;
      if (Number.isNaN(a) && Number.isNaN(l) && Number.isNaN(b.frequencyHz[i] ?? Number.NaN)) picks.push(k);
      if (Number.isFinite(a)) {
        if (aMin < 0 || a < (b.amplitudeDbfs[rowIndex(b, aMin)] ?? 0)) aMin = k;
        if (aMax < 0 || a > (b.amplitudeDbfs[rowIndex(b, aMax)] ?? 0)) aMax = k;
      }
      if (Number.isFinite(l)) {
        if (lMin < 0 || l < (b.levelDbfs[rowIndex(b, lMin)] ?? 0)) lMin = k;
        if (lMax < 0 || l > (b.levelDbfs[rowIndex(b, lMax)] ?? 0)) lMax = k;
      }
    }
    for (const c of [aMin, aMax, lMin, lMax]) if (c >= 0 && !picks.includes(c)) picks.push(c);
    if (!picks.length) picks.push(k - 1);
    picks.sort((x, y) => x - y);
    for (const c of picks) push(c);
  }
  return out;
}
