/**
 * What the Listen screen draws, kept by the run controller: the ring buffer of the track, the
 * live summary, the time-weighted levels, the input peak, and the facts of the run that the
 * readouts need (calibration, sensor scaling, band). Views read it on requestAnimationFrame;
 * only the controller writes it.
 */
import type { Marker, Onset } from '../../dsp/types';
import type { UpdateMessage, MarginEstimate } from '../worker/protocol';
import { emptyLiveSummary, isSameTone, type LiveSummary } from '../worker/live-summary';
import type { Calibration } from '../settings';
import { appendColumns, appendFrames, createLiveBuffer, resetLiveBuffer, type LiveBuffer } from './live-buffer';
import { createTimeWeightedLevel, resetTimeWeightedLevel, stepTimeWeightedLevel, weightedLevelDb, type TimeWeightedLevel, type TimeWeighting } from './time-weighting';

/** Rows of track kept on screen: 100 rows/s for 10 minutes. */
const BUFFER_ROWS = 60_000;

/** Where the samples come from, as far as the readouts care. */
export type InputKind = 'microphone' | 'sound-file' | 'sensor';

export interface LiveModel {
  buffer: LiveBuffer;
  summary: LiveSummary;
  /** Latest margin of the quiet system (linear growth rate from the noise), when the analysis gives one. */
  margin: MarginEstimate | null;
  /** The latest onset announced as it happened (dsp/live-onset.ts), and how many were announced. */
  lastOnset: Onset | null;
  onsetCount: number;
  /** Broadband level of the band, time-weighted, never below the tone's (dBFS, full-scale sine = 0 dBFS). */
  level: TimeWeightedLevel;
  /** The tone's level, time-weighted the same way. */
  toneLevel: TimeWeightedLevel;
  weighting: TimeWeighting;
  peakAbs: number;
  clipUntilMs: number;
  timeS: number;
  inputKind: InputKind;
  /** dBFS → dB SPL offset: a microphone's calibration, or the scaling of sensor data in Pa. */
  calibration: Calibration | undefined;
  isAWeighted: boolean;
  bandLowHz: number;
  bandHighHz: number;
}

export function createLiveModel(weighting: TimeWeighting): LiveModel {
  return {
    buffer: createLiveBuffer(BUFFER_ROWS),
    summary: emptyLiveSummary(),
    margin: null,
    lastOnset: null,
    onsetCount: 0,
    level: createTimeWeightedLevel(weighting),
    toneLevel: createTimeWeightedLevel(weighting),
    weighting,
    peakAbs: 0,
    clipUntilMs: 0,
    timeS: 0,
    inputKind: 'microphone',
    calibration: undefined,
    isAWeighted: false,
    bandLowHz: 20,
    bandHighHz: 4000,
  };
}

/** Empties the model for a new run with the given facts. */
export function resetLiveModel(model: LiveModel, facts: Pick<LiveModel, 'inputKind' | 'calibration' | 'isAWeighted' | 'bandLowHz' | 'bandHighHz' | 'weighting'>): void {
  resetLiveBuffer(model.buffer);
  model.summary = emptyLiveSummary();
  model.margin = null;
  model.lastOnset = null;
  model.onsetCount = 0;
  if (model.weighting !== facts.weighting) {
    model.level = createTimeWeightedLevel(facts.weighting);
    model.toneLevel = createTimeWeightedLevel(facts.weighting);
  }
  resetTimeWeightedLevel(model.level);
  resetTimeWeightedLevel(model.toneLevel);
  model.peakAbs = 0;
  model.timeS = 0;
  Object.assign(model, facts);
}

/** True when a spectrum holds sound rather than digital silence (a bin above −130 dBFS, under 16-bit dither). */
function hasSound(spectrumDbfs: Float32Array): boolean {
  for (let i = 0; i < spectrumDbfs.length; i++) if ((spectrumDbfs[i] ?? -Infinity) > -130) return true;
  return false;
}

/** Applies a worker update; returns the markers it placed (for the marker list). */
export function applyUpdate(model: LiveModel, m: UpdateMessage): Marker[] {
  const b = model.buffer;
  appendFrames(b, m.frames);
  // Plot the fits of the main tone only; weaker candidate tones have segments of their own.
  for (const s of m.segments) if (isSameTone(s.frequencyHz, m.mainFrequencyHz)) b.segments.push(s);
  for (const mk of m.markers) b.markers.push(mk);
  if (m.spectrumDbfs && hasSound(m.spectrumDbfs)) {
    b.spectrumDbfs = m.spectrumDbfs;
    b.spectrumBinHz = m.spectrumBinHz;
    b.spectrumCount++;
  }
  appendColumns(b, m.columns, m.columnBandHz);
  b.version++;
  model.summary = m.summary;
  if (m.margin !== undefined) model.margin = m.margin;
  if (m.onsets.length > 0) {
    model.lastOnset = m.onsets[m.onsets.length - 1];
    model.onsetCount += m.onsets.length;
  }
  model.timeS = m.timeS;
  for (const f of m.frames) {
    // Both levels are in dBFS re a full-scale sine; the band's mean square holds the tone's, so
    // the broadband level is never shown under the tone level (a short frame against a slow
    // tone's period can read either).
    const tonePower = Number.isFinite(f.amplitudeDbfs) ? 10 ** (f.amplitudeDbfs / 10) : 0;
    const bandPower = Number.isFinite(f.levelDbfs) ? 10 ** (f.levelDbfs / 10) : Number.NaN;
    stepTimeWeightedLevel(model.level, f.timeS, Math.max(bandPower, tonePower));
    // The tone's level starts with the tone (a meter pointed at it), and falls once it is gone.
    if (tonePower > 0 || Number.isFinite(model.toneLevel.meanSquare)) stepTimeWeightedLevel(model.toneLevel, f.timeS, tonePower);
  }
  model.peakAbs = m.peakAbs;
  if (m.isClipped) model.clipUntilMs = performance.now() + 2000;
  return m.markers;
}

/** The displayed levels, dBFS (NaN when none). */
export function liveLevels(model: LiveModel): { levelDbfs: number; toneDbfs: number } {
  return { levelDbfs: weightedLevelDb(model.level), toneDbfs: weightedLevelDb(model.toneLevel) };
}
