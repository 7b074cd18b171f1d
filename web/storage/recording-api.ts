import type { DuctGeometry, Marker, Report, TrackFrame } from '../../dsp/types';

/** What the listen screen knows when a session starts. */
export interface NewSessionMeta {
  source: 'microphone' | 'file';
  fileName?: string;
  sampleRateHz: number;
  site?: string;
  equipment?: string;
  notes?: string;
  geometry?: DuctGeometry;
  /** Calibration offset added to dBFS to give dB SPL, and where it came from. */
  calibrationOffsetDb?: number;
  calibrationSource?: string;
  /** The capture settings the browser reports (echoCancellation etc.), for the record. */
  captureSettings?: Record<string, unknown>;
  keepAudio: boolean;
}

/**
 * A session being recorded. Calls are cheap and never throw: writes are batched and flushed to
 * IndexedDB about once a second (a crash loses at most a couple of seconds). Problems such as a
 * full disk arrive through `onProblem` and the recorder keeps what it can (track and report first).
 */
export interface SessionRecorder {
  readonly id: string;
  /**
   * Keeps a block of raw audio. The recorder copies it, unless `isHandedOver`: then the caller gives
   * the block up (it may be transferred to the writer's worker and read as empty afterwards).
   */
  appendAudio(block: Float32Array, isHandedOver?: boolean): void;
  appendFrames(frames: readonly TrackFrame[]): void;
  addMarker(marker: Marker): void;
  /** Mark a gap in the input (suspended capture), at time `timeS`. */
  addGap(timeS: number, missingS: number): void;
  onProblem(fn: (message: string) => void): void;
  /** Final flush with the report; resolves when everything is on disk. */
  finish(report: Report): Promise<void>;
}
