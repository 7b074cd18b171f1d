/**
 * Exports: a bundle (zip) of one or more sessions, each as session JSON, track CSV, audio WAV and
 * a printable HTML report; or the track CSV or the WAV alone. Shared through the Web Share API
 * where the device can share files, else downloaded.
 */
import { strToU8, zipSync, type Zippable } from 'fflate';
import { finalStates } from '../../dsp/final-states';
import type { Report, TrackFrame } from '../../dsp/types';
import { encodeWav } from '../../dsp/io/wav-write';
import { BUNDLE_FORMAT, BUNDLE_SCHEMA_VERSION, SESSION_FORMAT, SESSION_JSON_MAX_BYTES, encodeNumber } from './bundle-schema';
import { DEFAULT_ZIP_LIMITS, formatBytes } from './zip-read';
import type { SessionDb, SessionRecord } from './db';
import { buildReportHtml } from './report-html';
import { loadFullSession, type FullSession } from './sessions';

/** JSON text in which NaN and ±∞ travel as "NaN", "Infinity", "-Infinity" (see bundle-schema.ts). Compact: tracks are long. */
export function toJsonText(value: unknown): string {
  return JSON.stringify(value, (_k, x: unknown) => (typeof x === 'number' && !Number.isFinite(x) ? encodeNumber(x) : x));
}

/** The session.json object of a bundle (storage details such as chunk counts left out). */
export function toSessionFile(full: FullSession, exportedAtMs: number): object {
  const r = full.record;
  const t = full.track;
  return {
    format: SESSION_FORMAT,
    schemaVersion: BUNDLE_SCHEMA_VERSION,
    exportedAtMs: Math.round(exportedAtMs),
    session: {
      id: r.id,
      createdAtMs: r.createdAtMs,
      updatedAtMs: r.updatedAtMs,
      // A session still being written is exported as what it is on disk: interrupted.
      status: r.status === 'recording' ? 'interrupted' : r.status,
      meta: r.meta,
      markers: r.markers,
      gaps: r.gaps,
      report: r.report,
      durationS: r.durationS,
      audio: { isKept: r.audio.isKept, sampleCount: full.audio?.length ?? 0, ...(r.audio.stoppedReason !== undefined ? { stoppedReason: r.audio.stoppedReason } : {}) },
      history: r.history,
    },
    track: {
      timeS: t.map((f) => f.timeS),
      frequencyHz: t.map((f) => f.frequencyHz),
      amplitudeDbfs: t.map((f) => f.amplitudeDbfs),
      levelDbfs: t.map((f) => f.levelDbfs),
      state: t.map((f) => f.state),
      isClipped: t.map((f) => f.isClipped),
      isAfterGap: t.map((f) => f.isAfterGap),
    },
  };
}

/** A number for CSV: shortest text that reads back to the same double; empty for NaN. */
function csvNumber(x: number): string {
  if (Number.isNaN(x)) return '';
  return String(x);
}

/**
 * The track as CSV (RFC 4180: comma separated, CRLF line ends, one header line). Empty field =
 * no value (no tone). With a calibration, an amplitude column in dB SPL is added. With the
 * session's report, each frame's state is its final one (dsp/final-states.ts, as the command
 * line's --csv), not the live state that lags it by 0.1–1 s.
 */
export function trackCsv(track: readonly TrackFrame[], calibrationOffsetDb?: number, report?: Report | null): string {
  const hasSpl = typeof calibrationOffsetDb === 'number' && Number.isFinite(calibrationOffsetDb);
  const header = ['time_s', 'frequency_hz', 'amplitude_dbfs', ...(hasSpl ? ['amplitude_db_spl'] : []), 'level_dbfs', 'state', 'is_clipped', 'is_after_gap'];
  const lines = [header.join(',')];
  const final = report ? finalStates(track.map((f) => f.timeS), report) : null;
  for (const [i, f] of track.entries()) {
    const cells = [csvNumber(f.timeS), csvNumber(f.frequencyHz), csvNumber(f.amplitudeDbfs)];
    if (hasSpl) cells.push(csvNumber(f.amplitudeDbfs + (calibrationOffsetDb as number)));
    cells.push(csvNumber(f.levelDbfs), final ? final[i] : f.state, f.isClipped ? '1' : '0', f.isAfterGap ? '1' : '0');
    lines.push(cells.join(','));
  }
  return lines.join('\r\n') + '\r\n';
}

/** A file-name-safe short form of user text. */
function slug(text: string): string {
  return text.normalize('NFKD').replace(/[^A-Za-z0-9]+/g, '-').replace(/^-+|-+$/g, '').slice(0, 40).toLowerCase();
}

/** Base file name of a session: humgauge-<date>-<site>-<id prefix>. */
export function sessionBaseName(r: SessionRecord): string {
  const date = new Date(r.createdAtMs).toISOString().slice(0, 10);
  const site = slug(r.meta.site);
  return ['humgauge', date, site, r.id.slice(0, 8)].filter(Boolean).join('-');
}

/** Sample encoding of a bundle's audio.wav files. */
export type BundleAudio = 'pcm16' | 'float32';

export interface BundleOptions {
  /**
   * 'pcm16' (default): half the size of float, quantisation noise 98 dB below full scale
   * (6.02·16 + 1.76 dB, REFERENCES.md §80), under any phone microphone's own noise. 'float32'
   * keeps every stored sample exactly. A session with samples beyond full scale is always written
   * as float, so nothing is clipped.
   */
  audio?: BundleAudio;
}

/** True when every sample fits 16-bit PCM without clipping (|x| ≤ 1). */
function fitsPcm16(samples: Float32Array): boolean {
  for (let i = 0; i < samples.length; i++) if (!(Math.abs(samples[i]) <= 1)) return false;
  return true;
}

/**
 * The audio.wav of a session. A WAV header holds a whole number of Hz: a session at a fractional
 * rate (a sensor log) is written at the nearest whole rate, and its exact rate stays in session.json.
 */
function sessionAudioWav(audio: Float32Array, sampleRateHz: number, format: BundleAudio): Uint8Array {
  return encodeWav(audio, Math.max(1, Math.round(sampleRateHz)), format === 'pcm16' && fitsPcm16(audio) ? 'pcm16' : 'float32');
}

/** The zip bundle of one or more sessions: manifest.json plus one folder per session. */
export function buildBundle(sessions: readonly FullSession[], exportedAtMs = Date.now(), options: BundleOptions = {}): Uint8Array {
  if (sessions.length === 0) throw new RangeError('buildBundle: no session given');
  const files: Zippable = {};
  const listed: { id: string; folder: string; hasAudio: boolean }[] = [];
  for (const s of sessions) {
    let folder = sessionBaseName(s.record);
    while (listed.some((l) => l.folder === folder)) folder += '-x';
    const hasAudio = !!s.audio && s.audio.length > 0;
    listed.push({ id: s.record.id, folder, hasAudio });
    const json = strToU8(toJsonText(toSessionFile(s, exportedAtMs)));
    // What we export we import: never write what the import would refuse.
    if (json.length > SESSION_JSON_MAX_BYTES) throw new RangeError(`The session of ${formatBytes(json.length)} of JSON is longer than an import accepts (${formatBytes(SESSION_JSON_MAX_BYTES)}); export its track as CSV and its audio as WAV instead.`);
    files[`${folder}/session.json`] = json;
    files[`${folder}/track.csv`] = strToU8(trackCsv(s.track, s.record.meta.calibrationOffsetDb, s.record.report));
    files[`${folder}/report.html`] = strToU8(buildReportHtml(s.record, s.track, exportedAtMs));
    // Deflate gains little on microphone noise and is slow on hundreds of megabytes, so the audio
    // is stored uncompressed.
    if (hasAudio) files[`${folder}/audio.wav`] = [sessionAudioWav(s.audio as Float32Array, s.record.meta.sampleRateHz, options.audio ?? 'pcm16'), { level: 0 }];
  }
  let audioBytes = 0;
  for (const f of Object.values(files)) if (Array.isArray(f)) audioBytes += (f[0] as Uint8Array).length;
  if (audioBytes > DEFAULT_ZIP_LIMITS.maxZipBytes) throw new RangeError(`The audio of these sessions is ${formatBytes(audioBytes)}, more than a bundle may hold (${formatBytes(DEFAULT_ZIP_LIMITS.maxZipBytes)}): export fewer sessions at a time, or with 16-bit audio.`);
  files['manifest.json'] = strToU8(toJsonText({ format: BUNDLE_FORMAT, schemaVersion: BUNDLE_SCHEMA_VERSION, exportedAtMs: Math.round(exportedAtMs), sessions: listed }));
  // Zip (DOS) dates start in 1980.
  return zipSync(files, { level: 1, mtime: new Date(Math.max(exportedAtMs, Date.UTC(1980, 0, 2))) });
}

/** A bundle and how many sessions it holds. */
export interface StoredBundle {
  bytes: Uint8Array;
  sessionCount: number;
}

/**
 * The bundle of the stored sessions `ids` that are still stored, in that order, read and zipped
 * where the store is read (the storage worker, off-thread.ts callStore): the page neither stalls
 * on the zip nor holds the sessions' audio. Throws RangeError when none of them is stored, or as
 * buildBundle does.
 */
export async function bundleStoredSessions(db: SessionDb, ids: readonly string[], exportedAtMs: number, options: BundleOptions = {}): Promise<StoredBundle> {
  const sessions: FullSession[] = [];
  for (const id of ids) {
    const s = await loadFullSession(db, id);
    if (s) sessions.push(s);
  }
  if (sessions.length === 0) throw new RangeError('None of the chosen sessions is stored any more: nothing was exported.');
  return { bytes: buildBundle(sessions, exportedAtMs, options), sessionCount: sessions.length };
}

/** The WAV alone: 16-bit PCM, the most widely readable form (float when a sample lies beyond full scale). */
export function sessionWav(audio: Float32Array, sampleRateHz: number): Uint8Array {
  return sessionAudioWav(audio, sampleRateHz, 'pcm16');
}

export type DeliveryResult = 'shared' | 'downloaded' | 'cancelled';

/**
 * Hands a file to the user: the share sheet where navigator.canShare({ files }) allows it, else a
 * download through a blob URL on an <a download>.
 */
export async function shareOrDownload(bytes: Uint8Array, fileName: string, mimeType: string): Promise<DeliveryResult> {
  const file = new File([bytes as Uint8Array<ArrayBuffer>], fileName, { type: mimeType });
  const nav = navigator as Navigator & { canShare?: (data: ShareData) => boolean };
  if (typeof nav.canShare === 'function' && typeof nav.share === 'function' && nav.canShare({ files: [file] })) {
    try {
      await nav.share({ files: [file], title: fileName });
      return 'shared';
    } catch (err) {
      if (err instanceof DOMException && err.name === 'AbortError') return 'cancelled';
      // Any other refusal (not allowed, too large): fall back to a download.
    }
  }
  const url = URL.createObjectURL(file);
  const a = document.createElement('a');
  a.href = url;
  a.download = fileName;
  a.rel = 'noopener';
  a.hidden = true;
  document.body.append(a);
  a.click();
  a.remove();
  setTimeout(() => URL.revokeObjectURL(url), 60_000);
  return 'downloaded';
}
