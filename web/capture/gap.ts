/**
 * Detecting input lost while capture was suspended (tab hidden, phone screen off, a call): the
 * audio clock stops while the wall clock runs on, so the missing time is the wall time elapsed
 * minus the audio time elapsed since the last check.
 */

/** Shortest loss reported as a gap, s: shorter differences are scheduling jitter of the two clocks. */
export const MIN_GAP_S = 0.25;

export interface ClockPair {
  /** performance.now(), ms. */
  wallMs: number;
  /** AudioContext.currentTime, s. */
  audioS: number;
}

/**
 * Seconds of input missing between `since` and `now` (0 when under MIN_GAP_S or when the clocks
 * went backwards, which a fresh context can do).
 */
export function missingSeconds(since: ClockPair, now: ClockPair): number {
  const wallS = (now.wallMs - since.wallMs) / 1000;
  const audioS = now.audioS - since.audioS;
  const missing = wallS - audioS;
  return Number.isFinite(missing) && missing >= MIN_GAP_S ? missing : 0;
}
