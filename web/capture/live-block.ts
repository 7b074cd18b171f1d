/**
 * How much audio the analysis takes at a time while listening: the capture worklet posts blocks of
 * about LIVE_BLOCK_S and the analysis worker gathers shorter blocks to it. Each wake-up of the worker
 * and each update it posts has a fixed cost (the analysis state fetched back into the caches, the
 * page woken), so a few long blocks cost less than many short ones; 0.1 s is under the 125 ms of a
 * sound level meter's FAST time weighting (IEC 61672-1), and the track rows come out of the
 * analysis about every 170 ms anyway.
 */
export const LIVE_BLOCK_S = 0.1;

/** Samples in one render quantum of an AudioWorklet (W3C Web Audio API 1.0: the render quantum size). */
export const RENDER_QUANTUM = 128;

/** The capture worklet's block at `sampleRateHz`: LIVE_BLOCK_S rounded up to whole render quanta. */
export function liveBlockSamples(sampleRateHz: number): number {
  return Math.max(1, Math.ceil((LIVE_BLOCK_S * sampleRateHz) / RENDER_QUANTUM)) * RENDER_QUANTUM;
}
