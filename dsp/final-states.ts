/**
 * The final regime of each frame of a track. A track's own states are the live ones, which the
 * regime detector confirms only after the envelope has bent (0.1 s into a growth, about 1 s into a
 * steady limit cycle), while finish() places each boundary where the fitted curves put it; a
 * frame's final state is the kind of the main tone's segment it falls in ('quiet' before the
 * first). Shared by the command line's `--csv` and the app's exported track.
 */
import type { RegimeKind, Report, Segment } from './types';

/** One tone of the report with the segments and onsets nearest to it in frequency. */
export interface ToneGroup {
  frequencyHz: number;
  isSteadyLine: boolean;
  segments: Segment[];
  onsets: number;
}

/**
 * Sorts segments and onsets to the report's tones by nearest frequency (ratio), main tone first
 * (the tone nearest summary.frequencyHz). Without a tone list, all segments form one group.
 */
export function groupByTone(report: Report): ToneGroup[] {
  const tones = report.tones ?? [];
  const groups: ToneGroup[] =
    tones.length > 0
      ? tones.map((t) => ({ frequencyHz: t.frequencyHz, isSteadyLine: t.isSteadyLine, segments: [], onsets: 0 }))
      : report.summary.frequencyHz !== null || report.segments.length > 0
        ? [{ frequencyHz: report.summary.frequencyHz ?? report.segments[0].frequencyHz, isSteadyLine: false, segments: [], onsets: 0 }]
        : [];
  if (groups.length === 0) return groups;
  const nearest = (f: number): ToneGroup => {
    let best = groups[0];
    for (const g of groups) if (Math.abs(Math.log(f / g.frequencyHz)) < Math.abs(Math.log(f / best.frequencyHz))) best = g;
    return best;
  };
  for (const seg of report.segments) nearest(seg.frequencyHz).segments.push(seg);
  for (const o of report.onsets) nearest(o.frequencyHz).onsets++;
  const mainHz = report.summary.frequencyHz;
  if (mainHz !== null) {
    const main = nearest(mainHz);
    groups.splice(groups.indexOf(main), 1);
    groups.unshift(main);
  }
  return groups;
}

/**
 * Final states of frames at ascending `timesS`, from the report's main-tone segments; null when the
 * main tone has no segments (the live states are then all there is).
 */
export function finalStates(timesS: ArrayLike<number>, report: Report): RegimeKind[] | null {
  const segments = groupByTone(report)[0]?.segments ?? [];
  if (segments.length === 0) return null;
  const out: RegimeKind[] = new Array<RegimeKind>(timesS.length);
  let seg = 0;
  for (let i = 0; i < timesS.length; i++) {
    const t = timesS[i];
    while (seg + 1 < segments.length && segments[seg + 1].startS <= t) seg++;
    out[i] = t < segments[0].startS ? 'quiet' : segments[seg].kind;
  }
  return out;
}
