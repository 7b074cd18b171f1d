/**
 * Grouping of tracked tones at the end of a record (docs/DESIGN.md "Grouping"): tracks of one
 * tone join into a family (a tone heard in several cycles may have several tracks), a track that
 * only held a louder tone through its band's skirt is a duplicate, and a weaker line that belongs
 * to a stronger tone (a harmonic, a sidelobe or intermodulation line) is grouped under it.
 */
import { STATE_GROWTH, STATE_QUIET, STATE_STEADY } from './regime';
import { segmentFrequency } from './segment-fit';
import { peakPower, type ToneRuntime } from './tone-store';
import { harmonicToleranceHz, matchToleranceHz, MAX_HARMONIC, medianFrequencyHz } from './track';

/** A weaker line within this fraction of a tone's frequency and this many dB below it is its sidelobe or intermodulation product. */
const NEAR_LINE_FRACTION = 0.35;
export const NEAR_LINE_DB = 20;
/** Active starts of two tracks of one tone closer than this are taken as simultaneous, s. */
const DUPLICATE_START_S = 0.05;
/**
 * Peak-power ratio (dB, and as a ratio) beyond which of two tracks of one tone the weaker holds it
 * through the skirt of its band: the narrow envelope band (dsp/envelope.ts, Blackman, noise
 * bandwidth 5 Hz) loses 0.14 dB at the 1 Hz retune step off centre and 1 dB near 2.7 Hz off.
 */
export const DUPLICATE_SKIRT_DB = 1;
const DUPLICATE_SKIRT_RATIO = 10 ** (DUPLICATE_SKIRT_DB / 10);
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
  /** Tracks that give no segments of their own (duplicates, lines grouped under a tone). */
  artefacts: Set<ToneRuntime>;
}

interface TrackInfo {
  freqHz: number;
  fromS: number;
  toS: number;
  top: number;
}

/** Frequency (phase-slope weighted over its active segments), active span and peak power of a track. */
function trackInfo(tr: ToneRuntime): TrackInfo {
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
    const f = segmentFrequency(tr, s);
    if (Number.isFinite(f)) {
      sw += s.endIdx - s.startIdx;
      swf += (s.endIdx - s.startIdx) * f;
    }
  }
  const f = sw > 0 ? swf / sw : medianFrequencyHz(tr.tone, -Infinity, Infinity);
  return { freqHz: f, fromS: from, toS: to, top: peakPower(tr) };
}

/**
 * A track beside a loud tone can hold that tone through its band's skirt: two tracks whose active
 * stretches overlap and whose envelopes turn at the same frequency are one tone; the one holding it
 * through its skirt (clearly weaker), else the one that saw it later (or the weaker, at once), is
 * dropped.
 */
function findDuplicates(all: ToneRuntime[], info: Map<ToneRuntime, TrackInfo>, binHz: number): Set<ToneRuntime> {
  const duplicates = new Set<ToneRuntime>();
  for (const a of all) {
    const ia = info.get(a);
    if (ia === undefined || Number.isNaN(ia.fromS)) continue;
    for (const b of all) {
      const ib = info.get(b);
      if (b === a || ib === undefined || Number.isNaN(ib.fromS) || duplicates.has(b)) continue;
      if (ib.toS < ia.fromS || ib.fromS > ia.toS) continue;
      // Keep the track whose band is centred on the tone (it sees the tone clearly stronger, and its
      // envelope was rebuilt from the sample history, growth included); between two that see it
      // alike, the one that saw it first, then the stronger.
      const level = ib.top / ia.top;
      const bFirst =
        level > DUPLICATE_SKIRT_RATIO ||
        (level >= 1 / DUPLICATE_SKIRT_RATIO && (ib.fromS < ia.fromS - DUPLICATE_START_S || (Math.abs(ib.fromS - ia.fromS) <= DUPLICATE_START_S && ib.top > ia.top)));
      if (!bFirst) continue;
      if (Math.abs(ia.freqHz - ib.freqHz) <= matchToleranceHz(binHz, ib.freqHz)) {
        duplicates.add(a);
        break;
      }
    }
  }
  return duplicates;
}

/** Growth spans [start, end] (s) of a family's tracks. */
function growthSpans(q: Family): [number, number][] {
  return q.tracks.flatMap((t) => t.regime.segments.filter((g) => g.state === STATE_GROWTH && g.endIdx > g.startIdx).map((g): [number, number] => [t.timeS[g.startIdx], t.timeS[g.endIdx - 1]]));
}

/**
 * Lines that belong to a stronger tone: a harmonic (at k·f0, weaker) or a sidelobe /
 * intermodulation line close beside it (NEAR_LINE_DB weaker), whose activity lies within the
 * tone's own and each of whose growths falls in a growth of the tone (a line that starts on its
 * own while the parent holds steady is a tone of its own). They get no onsets, segments or entry.
 */
function assignParents(families: Family[], binHz: number): void {
  const byPower = [...families].sort((a, b) => b.peakPower - a.peakPower);
  for (let i = 1; i < byPower.length; i++) {
    const fam = byPower[i];
    for (let j = 0; j < i && fam.parent === null; j++) {
      const par = byPower[j];
      if (par.parent !== null || (Number.isNaN(par.activeFromS) && !par.isSteadyLine)) continue;
      if (!(fam.peakPower < par.peakPower)) continue;
      const k = Math.round(fam.freqHz / par.freqHz);
      const isHarmonic = k >= 2 && k <= MAX_HARMONIC && Math.abs(fam.freqHz - k * par.freqHz) <= harmonicToleranceHz(binHz, par.freqHz, k);
      const isNear = Math.abs(fam.freqHz - par.freqHz) <= NEAR_LINE_FRACTION * par.freqHz && fam.peakPower * 10 ** (NEAR_LINE_DB / 10) < par.peakPower;
      if (!isHarmonic && !isNear) continue;
      const parGrowths = growthSpans(par);
      const within =
        Number.isNaN(fam.activeFromS) ||
        par.isSteadyLine ||
        (fam.activeFromS >= par.activeFromS - WITHIN_MARGIN_S &&
          fam.activeToS <= par.activeToS + WITHIN_MARGIN_S &&
          growthSpans(fam).every(([a]) => parGrowths.some(([p0, p1]) => a >= p0 - WITHIN_MARGIN_S && a <= p1 + WITHIN_MARGIN_S)));
      if (within) fam.parent = par;
    }
  }
}

/**
 * Groups the record's tracks into tones (spectral bin width binHz). A track whose envelope power
 * never rises above `floorPower` (full-scale sine = 1; the quantisation error of the input format,
 * dsp/levels.ts) is left out: it may be a product of quantising a strong tone.
 */
export function groupTones(all: ToneRuntime[], binHz: number, floorPower = 0): Grouping {
  const info = new Map<ToneRuntime, TrackInfo>();
  for (const tr of all) info.set(tr, trackInfo(tr));
  const duplicates = findDuplicates(all, info, binHz);
  const families: Family[] = [];
  for (const tr of all) {
    if (duplicates.has(tr)) continue;
    if (tr.regime.segments.every((s) => s.state === STATE_QUIET) && !tr.isSteadyLine && tr.maxExcessDb < QUIET_LINE_MIN_DB) continue;
    const ti = info.get(tr);
    if (ti === undefined || ti.top <= floorPower) continue;
    const { freqHz: f, top, fromS: from, toS: to } = ti;
    const fam = families.find((q) => Math.abs(q.freqHz - f) <= matchToleranceHz(binHz, f));
    if (fam) {
      fam.tracks.push(tr);
      fam.strength = Math.max(fam.strength, tr.maxExcessDb);
      fam.peakPower = Math.max(fam.peakPower, top);
      fam.isSteadyLine = fam.isSteadyLine && tr.isSteadyLine;
      if (!Number.isNaN(from)) {
        fam.activeFromS = Number.isNaN(fam.activeFromS) ? from : Math.min(fam.activeFromS, from);
        fam.activeToS = Number.isNaN(fam.activeToS) ? to : Math.max(fam.activeToS, to);
      }
    } else families.push({ freqHz: f, isSteadyLine: tr.isSteadyLine, strength: tr.maxExcessDb, peakPower: top, activeFromS: from, activeToS: to, tracks: [tr], parent: null });
  }
  for (const fam of families) {
    // A tone sounding through the whole record (never quiet, no onset) is a steady line too.
    const segs = fam.tracks.flatMap((t) => t.regime.segments);
    if (segs.length > 0 && segs.every((s) => s.state === STATE_STEADY)) fam.isSteadyLine = true;
  }
  assignParents(families, binHz);
  const artefacts = new Set([...duplicates, ...families.filter((f) => f.parent !== null).flatMap((f) => f.tracks)]);
  families.sort((a, b) => b.strength - a.strength);
  return { families, tones: families.filter((f) => f.parent === null), artefacts };
}

/** True when no other tone lies within the wide envelope band's reach of this tone (lines of a stronger tone and lines NEAR_LINE_DB weaker do not count). */
export function wideBandIsClear(tr: ToneRuntime, others: ToneRuntime[], artefacts: Set<ToneRuntime>, binHz: number): boolean {
  const f = tr.tone.freqHz;
  const same = matchToleranceHz(binHz, f);
  const floor = peakPower(tr) * 10 ** (-NEAR_LINE_DB / 10);
  for (const o of others) {
    if (o !== tr && !artefacts.has(o) && Math.abs(o.tone.freqHz - f) > same && Math.abs(o.tone.freqHz - f) < WIDE_CLEARANCE_HZ && peakPower(o) > floor) return false;
  }
  return true;
}
