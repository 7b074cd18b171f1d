import { CALIBRATOR_LEVEL_DB, calibrationOffsetDb as offsetFromReading } from '../dsp/levels';

/**
 * User settings kept in localStorage: band of interest, A-weighting, theme, whether audio is kept
 * with a session, and a calibration offset per microphone (dBFS → dB SPL).
 * Reading never throws: damaged or missing values fall back to defaults, one field at a time.
 */

export const SETTINGS_KEY = 'humgauge.settings';

/** Reference level of a common field sound calibrator, dB SPL at 1 kHz (common practice; REFERENCES.md §11). */
export const CALIBRATOR_LEVEL_DB_SPL = CALIBRATOR_LEVEL_DB;

export type Theme = 'daylight' | 'dark';

export interface Calibration {
  /** Added to a dBFS reading to give dB SPL. */
  offsetDb: number;
  /** How it was obtained, e.g. "calibrator 94 dB SPL at 1 kHz" or "reference meter 78.0 dB". */
  source: string;
  /** When, ISO 8601. */
  dateIso: string;
}

export interface Settings {
  bandLowHz: number;
  bandHighHz: number;
  /** Show the level readout A-weighted (IEC 61672-1) when calibrated. */
  isAWeighted: boolean;
  /** Time weighting of the level readout (IEC 61672-1 §5.8): 'slow' 1 s or 'fast' 0.125 s. */
  levelWeighting: 'slow' | 'fast';
  theme: Theme;
  /** Keep the raw audio with each session (larger storage). */
  isKeepingAudio: boolean;
  /** Exported bundles carry 32-bit float audio (exact, twice the size) instead of 16-bit PCM. */
  isExportingFloatAudio: boolean;
  /** First-run cautions acknowledged. */
  hasSeenCautions: boolean;
  /** Calibration per microphone, keyed by deviceKey(). */
  calibrations: Record<string, Calibration>;
}

/** Band limits the analysis accepts, Hz. */
export const BAND_MIN_HZ = 10;
export const BAND_MAX_HZ = 20_000;

export function defaultSettings(): Settings {
  return {
    bandLowHz: 20,
    bandHighHz: 4000,
    isAWeighted: false,
    levelWeighting: 'slow',
    theme: 'daylight',
    isKeepingAudio: true,
    isExportingFloatAudio: false,
    hasSeenCautions: false,
    calibrations: {},
  };
}

/** Minimal storage interface (localStorage fits it), so tests can pass their own. */
export interface KeyValueStore {
  getItem(key: string): string | null;
  setItem(key: string, value: string): void;
}

function browserStore(): KeyValueStore | null {
  try {
    return typeof localStorage === 'undefined' ? null : localStorage;
  } catch {
    return null;
  }
}

function isFiniteNumber(v: unknown): v is number {
  return typeof v === 'number' && Number.isFinite(v);
}

function readCalibrations(v: unknown): Record<string, Calibration> {
  const out: Record<string, Calibration> = {};
  if (typeof v !== 'object' || v === null) return out;
  for (const [key, c] of Object.entries(v as Record<string, unknown>)) {
    if (typeof c !== 'object' || c === null) continue;
    const rec = c as Record<string, unknown>;
    if (!isFiniteNumber(rec.offsetDb) || Math.abs(rec.offsetDb) > 200) continue;
    out[key] = {
      offsetDb: rec.offsetDb,
      source: typeof rec.source === 'string' ? rec.source : 'unknown',
      dateIso: typeof rec.dateIso === 'string' ? rec.dateIso : '',
    };
  }
  return out;
}

/** Checks a band; returns a message for the user, or null when it is usable. */
export function checkBand(lowHz: number, highHz: number): string | null {
  if (!isFiniteNumber(lowHz) || !isFiniteNumber(highHz)) return 'Enter both band limits as numbers in Hz.';
  if (lowHz < BAND_MIN_HZ) return `The lower band limit must be at least ${BAND_MIN_HZ} Hz.`;
  if (highHz > BAND_MAX_HZ) return `The upper band limit must be at most ${BAND_MAX_HZ} Hz.`;
  if (highHz < lowHz * 2) return 'The upper band limit must be at least twice the lower one (one octave or more).';
  return null;
}

/** Reads the settings; any missing or damaged field takes its default. */
export function loadSettings(store: KeyValueStore | null = browserStore()): Settings {
  const s = defaultSettings();
  if (!store) return s;
  let raw: unknown;
  try {
    raw = JSON.parse(store.getItem(SETTINGS_KEY) ?? 'null');
  } catch {
    return s;
  }
  if (typeof raw !== 'object' || raw === null) return s;
  const r = raw as Record<string, unknown>;
  if (isFiniteNumber(r.bandLowHz) && isFiniteNumber(r.bandHighHz) && checkBand(r.bandLowHz, r.bandHighHz) === null) {
    s.bandLowHz = r.bandLowHz;
    s.bandHighHz = r.bandHighHz;
  }
  if (typeof r.isAWeighted === 'boolean') s.isAWeighted = r.isAWeighted;
  if (r.levelWeighting === 'slow' || r.levelWeighting === 'fast') s.levelWeighting = r.levelWeighting;
  if (r.theme === 'daylight' || r.theme === 'dark') s.theme = r.theme;
  if (typeof r.isKeepingAudio === 'boolean') s.isKeepingAudio = r.isKeepingAudio;
  if (typeof r.isExportingFloatAudio === 'boolean') s.isExportingFloatAudio = r.isExportingFloatAudio;
  if (typeof r.hasSeenCautions === 'boolean') s.hasSeenCautions = r.hasSeenCautions;
  s.calibrations = readCalibrations(r.calibrations);
  return s;
}

/** Writes the settings; returns false when the browser refused (private mode, full storage). */
export function saveSettings(settings: Settings, store: KeyValueStore | null = browserStore()): boolean {
  if (!store) return false;
  try {
    store.setItem(SETTINGS_KEY, JSON.stringify(settings));
    return true;
  } catch {
    return false;
  }
}

/** Key under which a microphone's calibration is stored: its label when known, else its id, else "default". */
export function deviceKey(label: string | undefined, deviceId: string | undefined): string {
  if (label && label.trim()) return `label:${label.trim()}`;
  if (deviceId && deviceId.trim()) return `id:${deviceId.trim()}`;
  return 'default';
}

/**
 * Calibration offset from a reference: offset = reference level (dB SPL) − level measured (dBFS)
 * (REFERENCES.md §11; common practice). With a 94 dB SPL calibrator reading −38.2 dBFS the
 * offset is 132.2 dB. Returns null for a non-finite input or an implausible result.
 */
export function calibrationOffsetDb(referenceDbSpl: number, measuredDbfs: number): number | null {
  if (!isFiniteNumber(referenceDbSpl) || !isFiniteNumber(measuredDbfs)) return null;
  if (measuredDbfs > 0 || referenceDbSpl < 0 || referenceDbSpl > 160) return null;
  return offsetFromReading(measuredDbfs, referenceDbSpl);
}

/** dB SPL from a dBFS reading and a calibration offset (null when uncalibrated or not finite). */
export function toDbSpl(levelDbfs: number, calibration: Calibration | undefined): number | null {
  if (!calibration || !isFiniteNumber(levelDbfs)) return null;
  return levelDbfs + calibration.offsetDb;
}

/** Export options from the settings: the audio encoding of bundles (16-bit unless float is asked for). */
export function bundleOptions(settings: Settings = loadSettings()): { audio: 'pcm16' | 'float32' } {
  return { audio: settings.isExportingFloatAudio ? 'float32' : 'pcm16' };
}
