/**
 * Runs the streaming analysis of dsp/ again over a session's stored audio (recovery of an
 * interrupted recording). The app runs it in the storage worker (off-thread.ts); it works in
 * blocks and yields between batches, so a thread running it also stays responsive.
 */
import { MAX_SAMPLE_RATE_HZ, MIN_SAMPLE_RATE_HZ } from '../../dsp/condition';
import { createAnalysis, type Marker, type Report } from '../../dsp/index';
import type { AudioAnalyser } from './sessions';

const BLOCK_SAMPLES = 4096;
/** Blocks analysed between two yields to the event loop. */
const BLOCKS_PER_SLICE = 64;

const yieldToPage = (): Promise<void> => new Promise((r) => setTimeout(r, 0));

/**
 * Analyses `audio` (full scale ±1) at `sampleRateHz` with the user's markers; resolves with the
 * report, or null at a rate the analysis does not take (its limits, dsp/condition.ts: pressure
 * sensors from 500 Hz to audio interfaces at 192 kHz).
 */
export const analyseStoredAudio: AudioAnalyser = async (audio: Float32Array, sampleRateHz: number, markers: readonly Marker[]): Promise<Report | null> => {
  if (!(sampleRateHz >= MIN_SAMPLE_RATE_HZ && sampleRateHz <= MAX_SAMPLE_RATE_HZ)) return null;
  const analysis = createAnalysis({ sampleRateHz });
  for (const m of markers) analysis.mark(m);
  let blocks = 0;
  for (let i = 0; i < audio.length; i += BLOCK_SAMPLES) {
    analysis.push(audio.subarray(i, Math.min(audio.length, i + BLOCK_SAMPLES)));
    if (++blocks % BLOCKS_PER_SLICE === 0) await yieldToPage();
  }
  return analysis.finish();
};
