/**
 * The one routine that runs the streaming analysis of dsp/ again over a session's stored audio:
 * the completion of an interrupted recording (recovery) and the re-analysis the user asks for
 * (a band, markers moved or added after the fact, a mode of interest) both call it. The app runs
 * it in the storage worker (off-thread.ts), which reads the audio from the store itself; it works
 * in blocks and yields between batches, so a thread running it also stays responsive.
 */
import { MAX_SAMPLE_RATE_HZ, MIN_SAMPLE_RATE_HZ } from '../../dsp/condition';
import { createAnalysis, type Report } from '../../dsp/index';
import type { SessionDb } from './db';
import { loadAudio, type StoredAnalysisOptions } from './sessions';

const BLOCK_SAMPLES = 4096;
/** Blocks analysed between two yields to the event loop (and between two progress reports). */
const BLOCKS_PER_SLICE = 64;

const yieldToPage = (): Promise<void> => new Promise((r) => setTimeout(r, 0));

/**
 * Analyses `audio` (full scale ±1) at `sampleRateHz`; resolves with the report, or null at a rate
 * the analysis does not take (its limits, dsp/condition.ts: pressure sensors from 500 Hz to audio
 * interfaces at 192 kHz). Markers are given in time order. A band the analysis refuses rejects
 * with its RangeError (the caller checks the user's band first: settings.ts checkBand).
 */
export async function analyseStoredAudio(audio: Float32Array, sampleRateHz: number, o: StoredAnalysisOptions, onProgress?: (fraction: number) => void): Promise<Report | null> {
  if (!(sampleRateHz >= MIN_SAMPLE_RATE_HZ && sampleRateHz <= MAX_SAMPLE_RATE_HZ)) return null;
  const analysis = createAnalysis({ sampleRateHz, ...(o.bandLowHz !== undefined ? { bandLowHz: o.bandLowHz } : {}), ...(o.bandHighHz !== undefined ? { bandHighHz: o.bandHighHz } : {}) });
  for (const m of [...o.markers].sort((a, b) => a.timeS - b.timeS)) analysis.mark(m);
  let blocks = 0;
  for (let i = 0; i < audio.length; i += BLOCK_SAMPLES) {
    analysis.push(audio.subarray(i, Math.min(audio.length, i + BLOCK_SAMPLES)));
    if (++blocks % BLOCKS_PER_SLICE === 0) {
      onProgress?.(i / audio.length);
      await yieldToPage();
    }
  }
  return analysis.finish();
}

/** The work of a re-analysis job, wherever it runs. */
export async function reanalyseInThread(db: SessionDb, sessionId: string, options: StoredAnalysisOptions, onProgress: (fraction: number) => void): Promise<Report> {
  const record = await db.get('sessions', sessionId);
  if (!record) throw new Error('This session is no longer stored on this device.');
  const audio = await loadAudio(db, sessionId);
  if (!audio || audio.length === 0) throw new Error('No audio was kept with this session, so it cannot be analysed again.');
  const report = await analyseStoredAudio(audio, record.meta.sampleRateHz, options, onProgress);
  if (!report) throw new Error(`The analysis does not take audio at ${record.meta.sampleRateHz} Hz.`);
  return report;
}
