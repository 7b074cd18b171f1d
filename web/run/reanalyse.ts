/**
 * Re-analysis of a stored session: its kept audio runs again through the analysis (the same
 * pipeline as a live run or an opened file, in the storage worker, which reads the audio from the
 * store), with a band, markers moved or added after the fact, or a band centred on another mode
 * of interest. The session changes only when the user
 * keeps the new result.
 */
import type { Marker, Report } from '../../dsp/types';
import { checkBand } from '../settings';
import { formatClock, formatHz } from '../format';
import { callStore, reanalyseStoredSession } from '../storage/off-thread';

export interface ReanalysisOptions {
  bandLowHz: number;
  bandHighHz: number;
  markers: Marker[];
}

/**
 * The band of one octave centred (geometrically) on a mode of interest: [f/√2, f·√2]. One octave
 * is the narrowest band the analysis accepts (settings.ts checkBand), so neighbouring modes of a
 * duct (f, 2f, 3f) fall outside it.
 */
export function octaveAround(frequencyHz: number): [number, number] {
  return [frequencyHz / Math.SQRT2, frequencyHz * Math.SQRT2];
}

/** Checks the options; returns a message naming the field at fault, or null. */
export function checkReanalysis(o: ReanalysisOptions, durationS: number): string | null {
  const band = checkBand(o.bandLowHz, o.bandHighHz);
  if (band) return `Band: ${band}`;
  for (const [k, m] of o.markers.entries()) {
    if (!Number.isFinite(m.timeS) || m.timeS < 0 || m.timeS > durationS) return `Marker ${k + 1} (“${m.label}”): its time must lie within the record, 0:00.0 to ${formatClock(durationS)}.`;
  }
  return null;
}

/**
 * Runs the analysis again over the session's stored audio with these options, in the storage
 * worker (the routine recovery uses too: storage/reanalyse.ts); resolves with the report or
 * rejects with a message for the user.
 */
export async function reanalyseSession(sessionId: string, o: ReanalysisOptions, onProgress: (fraction: number) => void): Promise<Report> {
  try {
    return await reanalyseStoredSession(sessionId, { bandLowHz: o.bandLowHz, bandHighHz: o.bandHighHz, markers: o.markers }, onProgress);
  } catch (err) {
    throw new Error(`The analysis stopped with an error: ${err instanceof Error ? err.message : String(err)}`);
  }
}

/** Keeps a re-analysis as the session's report, with its markers, and notes how it was made. */
export async function keepReanalysis(sessionId: string, report: Report, o: ReanalysisOptions): Promise<void> {
  const note = `Re-analysed on ${new Date().toISOString()} with the band ${formatHz(o.bandLowHz)}–${formatHz(o.bandHighHz)} and ${o.markers.length} marker${o.markers.length === 1 ? '' : 's'}${o.markers.length ? ` (${o.markers.map((m) => `${m.label} at ${formatClock(m.timeS)}`).join(', ')})` : ''}.`;
  await callStore('replaceReport', sessionId, report, [...o.markers].sort((a, b) => a.timeS - b.timeS), note);
}
