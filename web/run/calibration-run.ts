/**
 * A calibration measurement for the Settings screen: a few seconds through the same capture and
 * analysis as the Listen screen (web/capture/measure-level.ts), never stored as a session.
 * Problems come back as messages for the user.
 */
import { measureLevel, type LevelMeasurement } from '../capture/measure-level';
import { CaptureError } from '../capture/mic';

export type { LevelMeasurement };

/** Measures the microphone's level over `durationS`; rejects with an Error whose message is for the user. */
export async function measureMicrophoneLevel(durationS: number, onProgress: (fraction: number) => void): Promise<LevelMeasurement> {
  try {
    return await measureLevel(durationS, onProgress);
  } catch (err) {
    if (err instanceof CaptureError) throw new Error(err.message);
    throw new Error(`Calibration failed: ${err instanceof Error ? err.message : String(err)}.`);
  }
}
