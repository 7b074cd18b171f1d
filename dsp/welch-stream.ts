/**
 * Welch's averaged periodogram (Hann frames of n samples, 50 % overlap; Welch 1967) of the latest
 * window, kept up to date as audio arrives: each frame is transformed once, when it is complete,
 * and its power added to the sum of its block of WELCH_BLOCK_FRAMES frames; a block is dropped once
 * every frame of it starts before the window. The average thus covers the window and at most one
 * block more. Frames sit on a fixed grid from the stream's origin (frame k starts at k·n/2).
 * Live use: dsp/live-margin.ts's resonance search.
 */
import { createRealFft, realFftWindowed, type RealFft } from './real-fft';

/** Frames per block of the sliding sum (8 s of 8192-sample frames at 8 kHz). */
const WELCH_BLOCK_FRAMES = 16;

export interface WelchStream {
  n: number;
  fft: RealFft;
  hann: Float64Array;
  frame: Float64Array;
  out: Float64Array;
  /** Power sums of the blocks held (a ring indexed by block number), and which block each slot holds (−1: none). */
  blocks: Float64Array[];
  blockOf: Float64Array;
  /** Index of the next frame to transform. */
  nextFrame: number;
  /** The averaged spectrum handed back: sums of |X_k|², k = 0 … n/2 − 1. */
  sum: Float64Array;
}

/** A stream of frames of n samples (a power of two) for windows of at most `maxWindow` samples. Allocates; throws RangeError naming n when it is not a power of two ≥ 4. */
export function createWelchStream(n: number, maxWindow: number): WelchStream {
  if (!(n >= 4 && (n & (n - 1)) === 0)) throw new RangeError(`n must be a power of two ≥ 4, got ${n}`);
  const hann = new Float64Array(n);
  for (let i = 0; i < n; i++) hann[i] = 0.5 - 0.5 * Math.cos((2 * Math.PI * i) / n);
  const slots = Math.ceil((2 * maxWindow) / n / WELCH_BLOCK_FRAMES) + 2;
  return {
    n,
    fft: createRealFft(n),
    hann,
    frame: new Float64Array(n),
    out: new Float64Array(2 * n),
    blocks: Array.from({ length: slots }, () => new Float64Array(n / 2)),
    blockOf: new Float64Array(slots).fill(-1),
    nextFrame: 0,
    sum: new Float64Array(n / 2),
  };
}

/**
 * The summed frame powers over the window x, whose first sample is sample `x0` from the stream's
 * origin (windows only move forward), and how many frames they hold. Transforms the frames
 * completed since the last call; the sum is the stream's own array, valid until the next call.
 */
export function welchOfWindow(ws: WelchStream, x: Float32Array, x0: number): { sum: Float64Array; frames: number } {
  const n = ws.n;
  const hop = n / 2;
  const slots = ws.blocks.length;
  // Frames that left the window before they were transformed are skipped.
  ws.nextFrame = Math.max(ws.nextFrame, Math.ceil(x0 / hop));
  for (; ws.nextFrame * hop + n <= x0 + x.length; ws.nextFrame++) {
    const s = ws.nextFrame * hop - x0;
    for (let i = 0; i < n; i++) ws.frame[i] = x[s + i];
    realFftWindowed(ws.fft, ws.out, ws.frame, 0, ws.hann);
    const b = Math.floor(ws.nextFrame / WELCH_BLOCK_FRAMES);
    const slot = b % slots;
    const acc = ws.blocks[slot];
    if (ws.blockOf[slot] !== b) {
      acc.fill(0);
      ws.blockOf[slot] = b;
    }
    const out = ws.out;
    for (let k = 0; k < n / 2; k++) acc[k] += out[2 * k] * out[2 * k] + out[2 * k + 1] * out[2 * k + 1];
  }
  ws.sum.fill(0);
  let frames = 0;
  for (let slot = 0; slot < slots; slot++) {
    const b = ws.blockOf[slot];
    if (b < 0) continue;
    const firstFrame = b * WELCH_BLOCK_FRAMES;
    const endFrame = Math.min(firstFrame + WELCH_BLOCK_FRAMES, ws.nextFrame);
    // A block is kept while its last frame starts inside the window.
    if ((endFrame - 1) * hop < x0) continue;
    const acc = ws.blocks[slot];
    for (let k = 0; k < n / 2; k++) ws.sum[k] += acc[k];
    frames += endFrame - firstFrame;
  }
  return { sum: ws.sum, frames };
}
