/**
 * Messages between the app and the analysis worker. Every message has a `type` and the `id` of
 * the analysis run it belongs to; the worker answers errors as messages, never by throwing.
 *
 * Data flow while listening: the capture worklet posts sample blocks straight to the worker over a
 * MessagePort handed over in `start`; the worker runs dsp/ on them and posts batched `update`s
 * (about 15 per second) to the app, which only draws them.
 */
import type { AnalysisConfig, AnalysisUpdate, Interval, Marker, Report } from '../../dsp/types';
import type { LiveSummary } from './live-summary';
import { MAX_SAMPLE_RATE_HZ, MIN_SAMPLE_RATE_HZ } from '../../dsp/condition';

/** Where the samples of a run come from. */
export type RunSource = 'microphone' | 'file';

/** App → worker: begin a run. `port` (transferred) delivers `BlockMessage`s from the capture worklet. */
export interface StartRequest {
  type: 'start';
  id: number;
  config: AnalysisConfig;
  source: RunSource;
  /** Send the samples back in `audio` batches (about one per second) so the session can keep them. */
  isKeepingAudio: boolean;
  port?: MessagePort;
}

/** A block of mono samples (transferred), full scale ±1, at the run's sample rate. */
export interface BlockMessage {
  type: 'block';
  id: number;
  samples: Float32Array;
}

/** App → worker: input was missing for `missingSamples` samples (capture suspended). */
export interface GapRequest {
  type: 'gap';
  id: number;
  missingSamples: number;
}

/** App → worker: a marker typed by the user. Its time is set by the worker (samples seen so far) unless given. */
export interface MarkRequest {
  type: 'mark';
  id: number;
  marker: Omit<Marker, 'timeS'> & { timeS?: number };
}

/** App → worker: analyse a whole decoded file (channels transferred), reporting progress. */
export interface AnalyseFileRequest {
  type: 'analyse-file';
  id: number;
  config: AnalysisConfig;
  channels: Float32Array[];
  isKeepingAudio: boolean;
}

/**
 * App → worker: read a WAV file in the worker as a stream (bounded memory for long recordings)
 * and analyse it. The sample rate comes from the file; the worker answers `file-format` first.
 */
export interface AnalyseWavRequest {
  type: 'analyse-wav';
  id: number;
  file: Blob;
  fileName: string;
  bandLowHz?: number;
  bandHighHz?: number;
  isKeepingAudio: boolean;
}

/** App → worker: stop the run and return the report. */
export interface FinishRequest {
  type: 'finish';
  id: number;
}

export type ToWorker = StartRequest | BlockMessage | GapRequest | MarkRequest | AnalyseFileRequest | AnalyseWavRequest | FinishRequest;

/** Worker → app: the run is set up and accepts blocks. */
export interface ReadyMessage {
  type: 'ready';
  id: number;
}

/**
 * How close the quiet system is to humming: the linear growth rate of its least-damped mode
 * (negative = stable; −growth rate is the decay rate of the quiet system), with its 95 % interval,
 * estimated while it runs (e.g. from the noise that excites the mode). The verdict of the Listen
 * screen uses it when present.
 */
export interface MarginEstimate {
  frequencyHz: number;
  growthRatePerS: number;
  growthRateCi95PerS: Interval;
  /** How it was estimated, in words for the user (e.g. "from the noise-excited resonance"). */
  method: string;
  /** Time span of the data behind it, s. */
  startS: number;
  endS: number;
}

/** Rows of a spectrogram column: log-spaced from the band's low to its high edge. */
export const SPECTROGRAM_ROWS = 192;
/** Shortest time between two spectrogram columns, s of record (10 columns a second at most). */
export const SPECTROGRAM_STEP_S = 0.1;

/** One column of the spectrogram: the spectrum at `timeS` reduced to SPECTROGRAM_ROWS log-spaced rows (the loudest bin of each, dBFS). */
export interface SpectrogramColumn {
  timeS: number;
  dbfs: Float32Array;
}

/**
 * The bins of each of `rows` rows log-spaced over [lowHz, highHz] for a spectrum of `binCount`
 * bins of `binHz`: row r spans bins map[2r] … map[2r + 1] (the nearest bin when a row is narrower
 * than a bin). Depends only on the layout, so a run computes it once.
 */
export function logRowBins(binCount: number, binHz: number, lowHz: number, highHz: number, rows: number): Int32Array {
  const map = new Int32Array(2 * rows);
  const lo = Math.max(lowHz, binHz);
  const ratio = highHz / lo;
  for (let r = 0; r < rows; r++) {
    const f0 = lo * ratio ** (r / rows);
    const f1 = lo * ratio ** ((r + 1) / rows);
    let k0 = Math.round(f0 / binHz);
    let k1 = Math.max(k0, Math.round(f1 / binHz) - 1);
    k0 = Math.min(binCount - 1, Math.max(0, k0));
    k1 = Math.min(binCount - 1, Math.max(k0, k1));
    map[2 * r] = k0;
    map[2 * r + 1] = k1;
  }
  return map;
}

/** Each row of `out` gets the loudest bin of spectrumDbfs within its span of `map` (logRowBins); −200 dBFS when none. */
export function reduceWithRowBins(spectrumDbfs: Float32Array, map: Int32Array, out: Float32Array): void {
  for (let r = 0; r < out.length; r++) {
    let best = -Infinity;
    for (let k = map[2 * r]; k <= map[2 * r + 1]; k++) {
      const v = spectrumDbfs[k] ?? -Infinity;
      if (v > best) best = v;
    }
    out[r] = Number.isFinite(best) ? best : -200;
  }
}

/**
 * Reduces a spectrum (dBFS per bin of `binHz`) to `out.length` rows log-spaced over [lowHz, highHz]:
 * each row holds the loudest bin between its edges (the nearest bin when a row is narrower than a
 * bin), so a tone between rows is never lost.
 */
export function reduceToLogRows(spectrumDbfs: Float32Array, binHz: number, lowHz: number, highHz: number, out: Float32Array): void {
  reduceWithRowBins(spectrumDbfs, logRowBins(spectrumDbfs.length, binHz, lowHz, highHz, out.length), out);
}

/** Worker → app: what changed since the previous update. */
export interface UpdateMessage extends AnalysisUpdate {
  type: 'update';
  id: number;
  /** Samples analysed so far, and the time they span, s (gaps included). */
  samplesAnalysed: number;
  timeS: number;
  /** Markers placed since the previous update, with their times. */
  markers: Marker[];
  summary: LiveSummary;
  /** Last frequency of the main tone the track followed, Hz (NaN before any); segments of other tones are not the main story. */
  mainFrequencyHz: number;
  /** Spectrogram columns since the previous update: dBFS in SPECTROGRAM_ROWS log-spaced rows over `columnBandHz`. */
  columns: SpectrogramColumn[];
  columnBandHz: [number, number];
  /** Latest margin of the quiet system, when the analysis has one (absent: unchanged). */
  margin?: MarginEstimate | null;
  /**
   * Samples for the session store since the previous update (transferred), in chunks of about a
   * second, when the run keeps its audio: they travel with the update rather than in a message of
   * their own (each message wakes the page). The worker client hands each on as an `audio` message.
   */
  audio: Float32Array[];
}

/** Samples for the session store (mono, run sample rate): what the worker client makes of each chunk of an update's `audio`. */
export interface AudioMessage {
  type: 'audio';
  id: number;
  samples: Float32Array;
}

/** Worker → app: share of a file analysed so far (0–1). */
export interface ProgressMessage {
  type: 'progress';
  id: number;
  fraction: number;
}

/**
 * Where the worker spent its time during a run, ms of wall time inside each of its jobs (the
 * figures of the browser bench, scripts/bench-browser.mjs).
 */
export interface WorkerStageMs {
  /** Reading the input: WAV decoding, the mono mix and block copies of a file; joining the live blocks gathered for one analysis step. */
  input: number;
  /** dsp/ push() and finish(). */
  analysis: number;
  /** Copying each update's rows, onsets, segments and spectrum out of dsp/'s reused objects. */
  collect: number;
  /** Spectrogram columns (reduceToLogRows). */
  spectrogram: number;
  /** Feeding the live margin's ring (dsp/live-margin.ts). */
  marginFeed: number;
  /** Margin estimates (estimateLiveMargin), and how many were made. */
  marginEstimate: number;
  marginEstimates: number;
  /** The latest estimate's time, ms, and the span of audio it looked at, s (its cost grows with the span, up to LIVE_MARGIN_WINDOW_S). */
  marginLatestMs: number;
  marginLatestWindowS: number;
  /** Keeping the audio for the session store and posting it. */
  audio: number;
  /** Building and posting update batches (the summary and the structured clone), and how many were posted. */
  update: number;
  updates: number;
  /**
   * Of `update`: inside postMessage itself, ms. Wall time: a post wakes the page's thread, and on a
   * busy machine the worker may wait for a core meanwhile (the worker thread's own CPU per post is
   * a fraction of it).
   */
  updatePost: number;
}

/** Worker → app: the run finished; the report of the whole run. */
export interface ReportMessage {
  type: 'report';
  id: number;
  report: Report;
  /** Time spent inside the analysis (push and finish), ms, and the samples it analysed. */
  analysisMs: number;
  samplesAnalysed: number;
  /** Time the worker spent on each of its jobs during the run, ms. */
  stageMs: WorkerStageMs;
}

/** Worker → app: the format of a WAV read in the worker, known once its header is read. */
export interface FileFormatMessage {
  type: 'file-format';
  id: number;
  sampleRateHz: number;
  /** E.g. "WAV PCM 16-bit, 1 channel". */
  description: string;
  /** From the declared data size, s; null when the header does not say. */
  durationS: number | null;
}

/** Worker → app: something went wrong; `message` is for the user, `problem` names the kind (file readers' codes). */
export interface ErrorMessage {
  type: 'error';
  id: number;
  message: string;
  problem?: string;
}

export type FromWorker = ReadyMessage | UpdateMessage | AudioMessage | ProgressMessage | FileFormatMessage | ReportMessage | ErrorMessage;

/** Sample rates a run accepts, Hz: the analysis's own limits (sensor logs from 500 Hz, audio up to 192 kHz). */
export { MIN_SAMPLE_RATE_HZ, MAX_SAMPLE_RATE_HZ };

const TO_WORKER_TYPES: ReadonlySet<string> = new Set(['start', 'block', 'gap', 'mark', 'analyse-file', 'analyse-wav', 'finish']);
const FROM_WORKER_TYPES: ReadonlySet<string> = new Set(['ready', 'update', 'audio', 'progress', 'file-format', 'report', 'error']);

function hasTypeAndId(data: unknown): data is { type: string; id: number } {
  if (typeof data !== 'object' || data === null) return false;
  const rec = data as Record<string, unknown>;
  return typeof rec.type === 'string' && typeof rec.id === 'number' && Number.isInteger(rec.id);
}

/**
 * Checks a message arriving at the worker. Returns the typed message, or a reason it was refused
 * (which the worker sends back as an `error`).
 */
export function parseToWorker(data: unknown): { ok: true; message: ToWorker } | { ok: false; reason: string } {
  if (!hasTypeAndId(data)) return { ok: false, reason: 'message without a type and a whole-number id' };
  if (!TO_WORKER_TYPES.has(data.type)) return { ok: false, reason: `unknown message type "${data.type}"` };
  const rec = data as unknown as Record<string, unknown>;
  switch (data.type) {
    case 'start':
    case 'analyse-file': {
      const config = rec.config as Record<string, unknown> | undefined;
      const rate = config?.sampleRateHz;
      if (typeof rate !== 'number' || !Number.isFinite(rate) || rate < MIN_SAMPLE_RATE_HZ || rate > MAX_SAMPLE_RATE_HZ) {
        return { ok: false, reason: `sample rate ${String(rate)} Hz is outside ${MIN_SAMPLE_RATE_HZ}–${MAX_SAMPLE_RATE_HZ} Hz` };
      }
      if (data.type === 'analyse-file') {
        const ch = rec.channels;
        if (!Array.isArray(ch) || ch.length === 0 || !ch.every((c) => c instanceof Float32Array)) {
          return { ok: false, reason: 'the file holds no audio channels' };
        }
      }
      break;
    }
    case 'analyse-wav':
      if (typeof Blob === 'undefined' || !(rec.file instanceof Blob)) return { ok: false, reason: 'no file to read' };
      if (typeof rec.fileName !== 'string') return { ok: false, reason: 'the file has no name' };
      break;
    case 'block':
      if (!(rec.samples instanceof Float32Array)) return { ok: false, reason: 'block without Float32Array samples' };
      break;
    case 'gap': {
      const m = rec.missingSamples;
      if (typeof m !== 'number' || !Number.isFinite(m) || m < 0) return { ok: false, reason: 'gap length must be a non-negative number of samples' };
      break;
    }
    case 'mark': {
      const marker = rec.marker as Record<string, unknown> | undefined;
      if (typeof marker?.kind !== 'string' || typeof marker.label !== 'string') return { ok: false, reason: 'marker needs a kind and a label' };
      if (marker.value !== undefined && (typeof marker.value !== 'number' || !Number.isFinite(marker.value))) {
        return { ok: false, reason: 'marker value must be a finite number' };
      }
      break;
    }
    default:
      break;
  }
  return { ok: true, message: data as unknown as ToWorker };
}

/** Checks a message arriving from the worker (the app ignores anything else). */
export function isFromWorker(data: unknown): data is FromWorker {
  return hasTypeAndId(data) && FROM_WORKER_TYPES.has(data.type);
}

/** The objects to transfer (not copy) with a message: sample buffers and the worklet port. */
export function transferablesOf(message: ToWorker | FromWorker): Transferable[] {
  switch (message.type) {
    case 'block':
    case 'audio':
      return [message.samples.buffer as ArrayBuffer];
    case 'analyse-file':
      return [...new Set(message.channels.map((c) => c.buffer as ArrayBuffer))];
    case 'start':
      return message.port ? [message.port] : [];
    case 'update':
      return [
        ...(message.spectrumDbfs ? [message.spectrumDbfs.buffer as ArrayBuffer] : []),
        ...message.columns.map((c) => c.dbfs.buffer as ArrayBuffer),
        ...message.audio.map((a) => a.buffer as ArrayBuffer),
      ];
    default:
      return [];
  }
}
