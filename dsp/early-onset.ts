/**
 * Early announcement of an onset (docs/DESIGN.md "Live onsets"): the regime reads a tone's
 * envelope only up to the centre of the latest frame (where the band background is known), which
 * delays it by half a frame. For a quiet tone, the newer envelope samples are compared with the
 * latest background scaled by the change of the broadband level since the frame centre (a
 * broadband loudness step moves both; a tone that just started is still far below the broadband
 * level). The regime's own test (ON_DB held for its hold time, started from LOW_DB) announces the
 * onset live; the regime confirms it later and the report's onset comes from the fit. A false
 * early announcement (not confirmed within EARLY_CONFIRM_S) is dropped.
 *
 * This is the live-onset hook of the pipeline: pipeline.ts calls stepEarlyOnset for every alive
 * tone after each block of envelope samples and at every frame; a detector that announces sooner
 * replaces this function and keeps its contract (push at most one Onset per rise into `out`,
 * remember it in tr.earlyOnsetIdx so the regime's confirmation is not announced twice).
 */
import type { History } from './history';
import { LOW_DB, ON_DB, STATE_QUIET } from './regime';
import type { ToneRuntime } from './tone-store';
import type { Onset } from './types';

/** An early announcement the regime has not confirmed within this long is dropped, s. */
const EARLY_CONFIRM_S = 2;
/** Span of the broadband level compared before and after the frame centre, s. */
const LEVEL_SPAN_S = 0.1;
/** The broadband level change is trusted within these factors. */
const LEVEL_SCALE_MIN = 0.1;
const LEVEL_SCALE_MAX = 10;

export function stepEarlyOnset(tr: ToneRuntime, hist: History, frameCount: number, out: Onset[]): void {
  const rg = tr.regime;
  if (tr.isSteadyLine || !rg.allowOnsets || rg.state !== STATE_QUIET) return;
  if (tr.earlyOnsetIdx >= 0) {
    if (tr.processed - tr.earlyOnsetIdx > EARLY_CONFIRM_S * tr.env.outputRateHz) tr.earlyOnsetIdx = -1;
    return;
  }
  const fr = hist.frameTimeS.length;
  const last = frameCount - 1;
  if (last < tr.bgFrameFrom) return;
  const bgF = tr.bgFrame[last % fr] * rg.baseline;
  if (!(bgF > 0)) return;
  const envLen = hist.envMs.length;
  const span = Math.max(1, Math.round(LEVEL_SPAN_S * tr.env.outputRateHz));
  // Broadband mean square over the span around the frame centre and over the latest span.
  const gF = tr.g0 + Math.min(tr.n - 1, Math.max(0, tr.processed - 1));
  let msF = 0;
  for (let q = 0; q < span; q++) msF += hist.envMs[(gF - q + envLen) % envLen];
  const onLin = 10 ** (ON_DB / 10);
  const lowLin = 10 ** (LOW_DB / 10);
  let hold = 0;
  let lastLow = tr.processed;
  let msNow = msF;
  for (let k = tr.processed; k < tr.n; k++) {
    const g = tr.g0 + k;
    msNow += hist.envMs[g % envLen] - hist.envMs[(g - span + envLen) % envLen];
    if (tr.clipped[k]) return;
    const scale = Math.min(LEVEL_SCALE_MAX, Math.max(LEVEL_SCALE_MIN, msNow / msF));
    const ratio = tr.power[k] / (bgF * scale);
    if (ratio <= lowLin) lastLow = k;
    hold = ratio >= onLin ? hold + 1 : 0;
    if (hold >= rg.onHoldMin && lastLow - rg.quietStartIdx >= rg.minQuiet) {
      tr.earlyOnsetIdx = lastLow;
      out.push({ timeS: tr.timeS[lastLow], frequencyHz: tr.tone.freqHz });
      return;
    }
  }
}
