/**
 * Grouping of tracked tones at the end of a record (docs/DESIGN.md "Grouping"): tracks of one
 * tone join into a family (a tone heard in several cycles may have several tracks), a track that
 * only held a louder tone through its band's skirt is a duplicate, and a weaker line that belongs
 * to a stronger tone (a harmonic, a sidelobe or intermodulation line) is grouped under it.
 */
import { STATE_DECAY, STATE_GROWTH, STATE_QUIET, STATE_STEADY, type RegimeSegment } from './regime';
import { isLockedHarmonic } from './locking';
import { segmentFrequency } from './segment-fit';
import { ENVELOPE_WIDE_BANDWIDTH_HZ, indexAtTime, peakPower, topIndexIn, topPowerIn, type ToneRuntime } from './tone-store';
import { harmonicToleranceHz, isSameToneHz, matchToleranceHz, MAX_HARMONIC, medianFrequencyHz } from './track';

/** A weaker line within this fraction of a tone's frequency and this many dB below it is its sidelobe or intermodulation product. */
const NEAR_LINE_FRACTION = 0.35;
export const NEAR_LINE_DB = 20;
/**
 * Peak-power ratio (dB) beyond which of two tracks of one tone the weaker holds it through the
 * skirt of its band: the narrow envelope band (dsp/envelope.ts, Blackman, noise bandwidth 5 Hz)
 * loses 0.14 dB at the 1 Hz retune step off centre and 1 dB near 2.7 Hz off.
 */
export const DUPLICATE_SKIRT_DB = 1;
/** Margin on the parent tone's active span for a line that rises and falls with it, s. */
const WITHIN_MARGIN_S = 1;
/** A track that never left the quiet state counts as a line only when it stood this far over its background, dB. */
const QUIET_LINE_MIN_DB = 10;
/** Other tones closer than this disturb the wide envelope band (its kernel's main lobe), Hz. */
const WIDE_CLEARANCE_HZ = 100;

/** One tone of the record: its tracks, frequency, strength and active span. */
export interface Family {
  freqHz: number;
  isSteadyLine: boolean;
  strength: number;
  peakPower: number;
  /** Span of its non-quiet segments, s (NaN when none). */
  activeFromS: number;
  activeToS: number;
  tracks: ToneRuntime[];
  /** The stronger tone this line belongs to (harmonic, sidelobe), if any. */
  parent: Family | null;
}

export interface Grouping {
  /** Every family, strongest first. */
  families: Family[];
  /** Families that are tones of their own (no parent), strongest first. */
  tones: Family[];
  /** Tracks that give no segments of their own (lines grouped under a tone). */
  artefacts: Set<ToneRuntime>;
  /** Segments told already by an earlier track of the same tone. */
  dropped: Set<RegimeSegment>;
  /** The segments' phase-slope frequencies, each worked out once (for the segment fits too). */
  frequencyOf: FrequencyOf;
}

/**
 * A segment's phase-slope frequency (segment-fit.ts segmentFrequency), Hz, worked out once per
 * segment: grouping asks for it up to five times per segment and the segment fits once more, and
 * each answer is a pass over the segment's store entries. Segments do not change once the record
 * is finished.
 */
export type FrequencyOf = (tr: ToneRuntime, s: RegimeSegment) => number;

function memoisedSegmentFrequency(): FrequencyOf {
  const known = new Map<RegimeSegment, number>();
  return (tr, s) => {
    let f = known.get(s);
    if (f === undefined) {
      f = segmentFrequency(tr, s);
      known.set(s, f);
    }
    return f;
  };
}

interface TrackInfo {
  freqHz: number;
  fromS: number;
  toS: number;
  top: number;
}

/** Frequency (phase-slope weighted over its active segments), active span and peak power of a track. */
function trackInfo(tr: ToneRuntime, frequencyOf: FrequencyOf): TrackInfo {
  let from = Number.NaN;
  let to = Number.NaN;
  let sw = 0;
  let swf = 0;
  for (const s of tr.regime.segments) {
    if (s.state === STATE_QUIET || s.endIdx <= s.startIdx) continue;
    const a = tr.timeS[s.startIdx];
    const b = tr.timeS[s.endIdx - 1];
    from = Number.isNaN(from) ? a : Math.min(from, a);
    to = Number.isNaN(to) ? b : Math.max(to, b);
    const f = frequencyOf(tr, s);
    if (Number.isFinite(f)) {
      sw += s.endIdx - s.startIdx;
      swf += (s.endIdx - s.startIdx) * f;
    }
  }
  const f = sw > 0 ? swf / sw : medianFrequencyHz(tr.tone, -Infinity, Infinity);
  return { freqHz: f, fromS: from, toS: to, top: peakPower(tr) };
}

/**
 * Tracks of one tone overlap where a later track was started (its envelope rebuilt from the
 * history) while an earlier one still held the tone. Each stretch of the record is told once
 * (after dropSkirtDuplicates, which keeps the stronger reading of one line): a later track's
 * active segment that still overlaps an active segment kept from an earlier track is dropped, and
 * so is a later track's quiet segment that lies within an earlier track's store.
 */
function dropOverlaps(fam: Family, dropped: Set<RegimeSegment>): void {
  const tracks = [...fam.tracks].sort((a, b) => a.tone.id - b.tone.id);
  // Spans kept so far, [start, end] (s), as flat lists of numbers (searched once per segment).
  const active: number[] = [];
  const stores: number[] = [];
  for (const tr of tracks) {
    for (const s of tr.regime.segments) {
      if (s.endIdx <= s.startIdx || dropped.has(s)) continue;
      const a = tr.timeS[s.startIdx];
      const b = tr.timeS[s.endIdx - 1];
      if (s.state !== STATE_QUIET) {
        let overlaps = false;
        for (let j = 0; j < active.length && !overlaps; j += 2) overlaps = a < active[j + 1] && b > active[j];
        if (overlaps) dropped.add(s);
        else active.push(a, b);
      } else {
        let isWithin = false;
        for (let j = 0; j < stores.length && !isWithin; j += 2) isWithin = a >= stores[j] && b <= stores[j + 1];
        if (isWithin) dropped.add(s);
      }
    }
    if (tr.n > 0) stores.push(tr.timeS[0], tr.timeS[tr.n - 1]);
  }
}

/**
 * Tracks that tell one line at once: a track left on a nearby resonance, or a track of the same
 * tone left a few hertz off by a drift, reads a hum that rose beside it through the skirt of its
 * band (phase-slope frequency of the segment on the hum, level clearly lower). Where active
 * segments of two tracks overlap in time and lie within the match tolerance of each other, the
 * line is told by the track that sees it more than DUPLICATE_SKIRT_DB stronger over the overlap;
 * between two that see it alike, by the one started first. Segments further apart but within the
 * wide envelope band's half-width (ENVELOPE_WIDE_BANDWIDTH_HZ, the band through whose skirt a
 * track can read a neighbour) are a skirt read only when one is more than DUPLICATE_SKIRT_DB
 * weaker. The other's segment is dropped.
 */
function dropSkirtDuplicates(families: Family[], binHz: number, dropped: Set<RegimeSegment>, frequencyOf: FrequencyOf): void {
  const skirt = 10 ** (DUPLICATE_SKIRT_DB / 10);
  const segs: { fam: Family; tr: ToneRuntime; s: RegimeSegment; a: number; b: number; f: number }[] = [];
  for (const fam of families) {
    for (const tr of fam.tracks) {
      for (const s of tr.regime.segments) {
        if (s.state === STATE_QUIET || s.endIdx <= s.startIdx || dropped.has(s)) continue;
        const f = frequencyOf(tr, s);
        if (Number.isFinite(f)) segs.push({ fam, tr, s, a: tr.timeS[s.startIdx], b: tr.timeS[s.endIdx - 1], f });
      }
    }
  }
  for (const x of segs) {
    for (const y of segs) {
      if (x.tr === y.tr || dropped.has(x.s) || dropped.has(y.s) || !(x.a < y.b && x.b > y.a)) continue;
      const df = Math.abs(x.f - y.f);
      if (df > ENVELOPE_WIDE_BANDWIDTH_HZ) continue;
      const isSameLine = df <= matchToleranceHz(binHz, Math.max(x.f, y.f));
      // Levels of both over the overlap (each track's envelope index from its own time axis).
      const t0 = Math.max(x.a, y.a);
      const t1 = Math.min(x.b, y.b);
      const px = topPowerIn(x.tr, x.s.startIdx + indexOffset(x.tr, x.s.startIdx, t0), x.s.startIdx + indexOffset(x.tr, x.s.startIdx, t1) + 1);
      const py = topPowerIn(y.tr, y.s.startIdx + indexOffset(y.tr, y.s.startIdx, t0), y.s.startIdx + indexOffset(y.tr, y.s.startIdx, t1) + 1);
      // Beyond the match tolerance but inside the band, only a clearly weaker reading is a skirt read.
      if (!isSameLine && px <= skirt * py && py <= skirt * px) continue;
      const isXWeaker = py > skirt * px || (px <= skirt * py && y.tr.tone.id < x.tr.tone.id);
      dropped.add(isXWeaker ? x.s : y.s);
    }
  }
}

/** Envelope samples from index i0 of tr to time tS (rounded, ≥ 0). */
function indexOffset(tr: ToneRuntime, i0: number, tS: number): number {
  return Math.max(0, Math.round((tS - tr.timeS[i0]) * tr.env.outputRateHz));
}

/** Spans [start, end] (s) of a family's segments in `state`. */
function stateSpans(q: Family, state: number): [number, number][] {
  return q.tracks.flatMap((t) => t.regime.segments.filter((g) => g.state === state && g.endIdx > g.startIdx).map((g): [number, number] => [t.timeS[g.startIdx], t.timeS[g.endIdx - 1]]));
}

/**
 * Lines that belong to a stronger tone. A line near k·f (k = 2..MAX_HARMONIC) is that tone's
 * harmonic over each of its segments whose envelope is locked to the tone's (locking.ts): those
 * segments are dropped, and a line with no other active segment joins the tone. A second mode
 * near 2f, with its own rate and frequency, keeps its segments. A sidelobe or intermodulation
 * line close beside a tone (within NEAR_LINE_FRACTION of f and NEAR_LINE_DB weaker) joins it when
 * all its activity lies within the tone's own and each of its growths falls in a growth of the
 * tone (a line that starts on its own while the tone holds steady is a tone of its own).
 */
function assignParents(families: Family[], binHz: number, dropped: Set<RegimeSegment>, frequencyOf: FrequencyOf): void {
  const byPower = [...families].sort((a, b) => b.peakPower - a.peakPower);
  for (let i = 1; i < byPower.length; i++) {
    const fam = byPower[i];
    for (let j = 0; j < i && fam.parent === null; j++) {
      const par = byPower[j];
      if (par.parent !== null || (Number.isNaN(par.activeFromS) && !par.isSteadyLine)) continue;
      if (!(fam.peakPower < par.peakPower)) continue;
      // Near a harmonic, each segment is judged on its own frequency: a family may hold tracks
      // that read the harmonic through the skirts of their bands, so its mean can sit off k·f.
      const kFam = Math.round(fam.freqHz / par.freqHz);
      if (kFam >= 2 && kFam <= MAX_HARMONIC) {
        let isAllLocked = true;
        const parGrowths = stateSpans(par, STATE_GROWTH);
        const parDecays = stateSpans(par, STATE_DECAY);
        for (const tr of fam.tracks) {
          for (const s of tr.regime.segments) {
            if (s.state === STATE_QUIET || s.endIdx <= s.startIdx || dropped.has(s)) continue;
            const a = tr.timeS[s.startIdx];
            const f = frequencyOf(tr, s);
            const k = Number.isFinite(f) ? Math.round(f / par.freqHz) : kFam;
            const isOnHarmonic = k >= 2 && k <= MAX_HARMONIC && (!Number.isFinite(f) || Math.abs(f - k * par.freqHz) <= harmonicToleranceHz(binHz, par.freqHz, k));
            const risesWith = s.state === STATE_GROWTH && parGrowths.some(([p0, p1]) => a >= p0 - WITHIN_MARGIN_S && a <= p1 + WITHIN_MARGIN_S);
            // A decay on the harmonic that starts as the tone's own decay starts is the harmonic
            // dying with the tone: the driving that shaped the waveform has stopped, so neither A^k
            // nor the phase relation holds any more (the tone's frequency moves as it is released).
            const diesWith = s.state === STATE_DECAY && parDecays.some(([p0]) => Math.abs(a - p0) <= WITHIN_MARGIN_S);
            if (isOnHarmonic && (diesWith || isLockedHarmonic(tr, s.startIdx, s.endIdx, par.tracks, k, risesWith))) dropped.add(s);
            else isAllLocked = false;
          }
        }
        if (isAllLocked) fam.parent = par;
        continue;
      }
      const isNear = Math.abs(fam.freqHz - par.freqHz) <= NEAR_LINE_FRACTION * par.freqHz && fam.peakPower * 10 ** (NEAR_LINE_DB / 10) < par.peakPower;
      if (!isNear) continue;
      const parGrowths = stateSpans(par, STATE_GROWTH);
      const within =
        Number.isNaN(fam.activeFromS) ||
        par.isSteadyLine ||
        (fam.activeFromS >= par.activeFromS - WITHIN_MARGIN_S &&
          fam.activeToS <= par.activeToS + WITHIN_MARGIN_S &&
          stateSpans(fam, STATE_GROWTH).every(([a]) => parGrowths.some(([p0, p1]) => a >= p0 - WITHIN_MARGIN_S && a <= p1 + WITHIN_MARGIN_S)));
      if (within) fam.parent = par;
    }
  }
}

/** Active (non-quiet) segments of a family's tracks: span [start, end] (s) and frequency, Hz. */
function activeSpans(fam: Family, dropped: Set<RegimeSegment>, frequencyOf: FrequencyOf): [number, number, number][] {
  return fam.tracks.flatMap((t) => t.regime.segments.filter((g) => g.state !== STATE_QUIET && g.endIdx > g.startIdx && !dropped.has(g)).map((g): [number, number, number] => [t.timeS[g.startIdx], t.timeS[g.endIdx - 1], frequencyOf(t, g)]));
}

/**
 * A tone is a frequency neighbourhood that persists across quiet gaps: a track started during a
 * gap beside a tone's still-alive quiet track takes an identity of its own (identity passes only
 * from retired tracks, track.ts). Two families whose frequencies lie within the identity
 * neighbourhood (isSameToneHz) and whose active segments (those not told already by another
 * track, dropSkirtDuplicates) never overlap in time are one tone.
 */
function mergeDisjointFamilies(families: Family[], binHz: number, dropped: Set<RegimeSegment>, frequencyOf: FrequencyOf): Family[] {
  const out: Family[] = [];
  const spans = new Map<Family, [number, number, number][]>();
  for (const fam of families) spans.set(fam, activeSpans(fam, dropped, frequencyOf));
  const clash = (x: [number, number, number][], y: [number, number, number][]): boolean =>
    x.some(([a, b]) => y.some(([p0, p1]) => a < p1 && b > p0));
  for (const fam of families) {
    const own = spans.get(fam) as [number, number, number][];
    const into = own.length === 0 ? undefined : out.find((o) => {
      const other = spans.get(o) as [number, number, number][];
      return other.length > 0 && isSameToneHz(binHz, o.freqHz, fam.freqHz) && !clash(own, other);
    });
    if (into === undefined) {
      out.push(fam);
      continue;
    }
    into.tracks.push(...fam.tracks);
    into.strength = Math.max(into.strength, fam.strength);
    into.peakPower = Math.max(into.peakPower, fam.peakPower);
    into.isSteadyLine = into.isSteadyLine && fam.isSteadyLine;
    into.activeFromS = Math.min(into.activeFromS, fam.activeFromS);
    into.activeToS = Math.max(into.activeToS, fam.activeToS);
    (spans.get(into) as [number, number, number][]).push(...own);
  }
  return out;
}

/**
 * Groups the record's tracks into tones (spectral bin width binHz): tracks sharing a tone
 * identity (track.ts toneId) form one family, whatever the quiet gaps between them.
 */
export function groupTones(all: ToneRuntime[], binHz: number, floorPower = 0): Grouping {
  const dropped = new Set<RegimeSegment>();
  const frequencyOf = memoisedSegmentFrequency();
  const byId = new Map<number, Family>();
  let families: Family[] = [];
  for (const tr of all) {
    if (tr.regime.segments.every((s) => s.state === STATE_QUIET) && !tr.isSteadyLine && tr.maxExcessDb < QUIET_LINE_MIN_DB) continue;
    const ti = trackInfo(tr, frequencyOf);
    // A track never above the format's quantisation error may be a product of quantising a strong tone (dsp/levels.ts).
    if (ti.top <= floorPower) continue;
    const fam = byId.get(tr.tone.toneId);
    if (fam) {
      fam.tracks.push(tr);
      fam.strength = Math.max(fam.strength, tr.maxExcessDb);
      fam.peakPower = Math.max(fam.peakPower, ti.top);
      fam.isSteadyLine = fam.isSteadyLine && tr.isSteadyLine;
      if (!Number.isNaN(ti.fromS)) {
        fam.activeFromS = Number.isNaN(fam.activeFromS) ? ti.fromS : Math.min(fam.activeFromS, ti.fromS);
        fam.activeToS = Number.isNaN(fam.activeToS) ? ti.toS : Math.max(fam.activeToS, ti.toS);
      }
    } else {
      const f: Family = { freqHz: ti.freqHz, isSteadyLine: tr.isSteadyLine, strength: tr.maxExcessDb, peakPower: ti.top, activeFromS: ti.fromS, activeToS: ti.toS, tracks: [tr], parent: null };
      byId.set(tr.tone.toneId, f);
      families.push(f);
    }
  }
  dropSkirtDuplicates(families, binHz, dropped, frequencyOf);
  for (const fam of families) dropOverlaps(fam, dropped);
  families = mergeDisjointFamilies(families, binHz, dropped, frequencyOf);
  for (const fam of families) {
    dropOverlaps(fam, dropped);
    // A tone sounding through the whole record (never quiet, no onset) is a steady line too.
    const segs = fam.tracks.flatMap((t) => t.regime.segments).filter((s) => !dropped.has(s));
    if (segs.length > 0 && segs.every((s) => s.state === STATE_STEADY)) fam.isSteadyLine = true;
  }
  assignParents(families, binHz, dropped, frequencyOf);
  // A line whose harmonic segments went to a stronger tone is known by the segments it keeps.
  for (const fam of families) {
    if (fam.parent !== null) continue;
    let sw = 0;
    let swf = 0;
    for (const tr of fam.tracks) {
      for (const s of tr.regime.segments) {
        if (s.state === STATE_QUIET || s.endIdx <= s.startIdx || dropped.has(s)) continue;
        const f = frequencyOf(tr, s);
        if (!Number.isFinite(f)) continue;
        sw += s.endIdx - s.startIdx;
        swf += (s.endIdx - s.startIdx) * f;
      }
    }
    if (sw > 0) fam.freqHz = swf / sw;
  }
  const artefacts = new Set(families.filter((f) => f.parent !== null).flatMap((f) => f.tracks));
  families.sort((a, b) => b.strength - a.strength);
  return { families, tones: families.filter((f) => f.parent === null), artefacts, dropped, frequencyOf };
}

/**
 * True when no other tone sounds within the wide envelope band's reach of this tone over times
 * [t0S, t1S] (what one fit reads): lines of other tones (or of this tone's other cycles) heard only
 * at other times do not count, nor lines of a stronger tone, nor lines NEAR_LINE_DB weaker than
 * this tone there. Frequencies are those of the window itself (each track's demodulator where its
 * power peaks there), not a track's latest: a tone that drifts over a long record is held by
 * several tracks, whose latest frequencies say nothing of where they sat at this time.
 */
export function wideBandIsClear(tr: ToneRuntime, t0S: number, t1S: number, others: ToneRuntime[], artefacts: Set<ToneRuntime>, binHz: number): boolean {
  const k = topIndexIn(tr, indexAtTime(tr, t0S), indexAtTime(tr, t1S));
  if (k < 0) return true;
  const f = tr.demodHz[k];
  const same = matchToleranceHz(binHz, f);
  const floor = tr.power[k] * 10 ** (-NEAR_LINE_DB / 10);
  for (const o of others) {
    if (o === tr || artefacts.has(o)) continue;
    const ko = topIndexIn(o, indexAtTime(o, t0S), indexAtTime(o, t1S));
    if (ko < 0 || !(o.power[ko] > floor)) continue;
    const apart = Math.abs(o.demodHz[ko] - f);
    if (apart > same && apart < WIDE_CLEARANCE_HZ) return false;
  }
  return true;
}
