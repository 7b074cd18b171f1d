/**
 * The microphone side of a listening run: opens the capture, and watches the audio clock against
 * the wall clock so input lost while the page was frozen (tab hidden, screen off, a call) is
 * marked as a gap. Everything registers in the run's scope.
 */
import type { Scope } from '../lifecycle';
import { CaptureError, keepScreenAwake, openMicrophone, PROCESSING_KEYS, type MicCapture } from '../capture/mic';
import { missingSeconds, type ClockPair } from '../capture/gap';

export { CaptureError };
export type { MicCapture };

export interface MicRunHooks {
  /** True while this run is the current one and has analysed at least one block. */
  isAnalysing(): boolean;
  /** Input went missing for `missingS` seconds. */
  onGap(missingS: number): void;
  /** The track ended (unplugged, permission revoked, taken by another app). */
  onEnded(): void;
}

/** Opens the microphone for run `runId`; throws CaptureError with a message for the user. */
export async function openMicRun(scope: Scope, runId: number, hooks: MicRunHooks): Promise<MicCapture> {
  const mic = await openMicrophone(scope, runId);
  scope.listen(mic.track, 'ended', () => hooks.onEnded());
  const ctx = mic.context;
  // The clocks are compared only from the first analysed block on: start-up latency (permission,
  // worklet loading, the device opening) is not lost input and must not be marked as a gap.
  let reference: ClockPair | null = null;
  const checkForGap = (): void => {
    if (ctx.state !== 'running' || !hooks.isAnalysing()) return;
    const now: ClockPair = { wallMs: performance.now(), audioS: ctx.currentTime };
    if (!reference) {
      reference = now;
      return;
    }
    const missingS = missingSeconds(reference, now);
    reference = now;
    if (missingS > 0) hooks.onGap(missingS);
  };
  scope.listen(ctx, 'statechange', () => {
    if (ctx.state === 'running') checkForGap();
  });
  scope.listen(document, 'visibilitychange', () => {
    if (document.visibilityState !== 'visible') return;
    if (ctx.state !== 'running' && ctx.state !== 'closed') void ctx.resume().catch(() => undefined);
    else checkForGap();
  });
  // A freeze may end without any event reaching us; a slow timer catches it (one comparison, no audio work).
  const timer = setInterval(checkForGap, 2000);
  scope.add(() => clearInterval(timer));
  void keepScreenAwake(scope);
  return mic;
}

/** The capture settings stored with the session: what the browser reports, and what was asked. */
export function captureSettingsOf(mic: MicCapture): Record<string, unknown> {
  const out: Record<string, unknown> = { ...mic.settings };
  for (const k of PROCESSING_KEYS) out[`${k}Requested`] = false;
  return out;
}

/** Notes for the user about the capture (device, processing the browser keeps on, calibration). */
export function captureNotes(mic: MicCapture, isCalibrated: boolean): string[] {
  const notes: string[] = [`Microphone: ${mic.deviceLabel}, ${mic.sampleRateHz} Hz.`];
  if (mic.processingStillOn.length) {
    notes.push(
      `The browser keeps ${mic.processingStillOn.join(', ')} switched ON although asked to turn it off: growth and decay rates may be falsified. Try another browser or an external microphone.`,
    );
  }
  if (!isCalibrated) notes.push('Not calibrated: levels read in dBFS (see Settings to calibrate).');
  return notes;
}
