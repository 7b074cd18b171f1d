/// <reference lib="webworker" />
/**
 * The analysis worker: a thin adapter from messages (protocol.ts) to the streaming dsp/ analysis.
 * Blocks arrive from the capture worklet over a MessagePort (live) or as a whole decoded file;
 * updates go back to the app in batches of about 66 ms so the app only draws.
 */
import { createAnalysis } from '../../dsp/index';
import { createLiveMargin, estimateLiveMargin, feedLiveMargin, isLiveMarginDue, LIVE_MARGIN_EVERY_S, restartLiveMargin, type LiveMarginState } from '../../dsp/live-margin';
import { createWavDecoder, wavSampleBits } from '../../dsp/io/wav';
import { InputError } from '../../dsp/io/errors';
import type { Analysis, AnalysisConfig, Marker, Onset, Segment, TrackFrame } from '../../dsp/types';
import { LIVE_BLOCK_S } from '../capture/live-block';
import { emptyLiveSummary, updateLiveSummary, type LiveSummary } from './live-summary';
import { logRowBins, parseToWorker, reduceWithRowBins, SPECTROGRAM_ROWS, SPECTROGRAM_STEP_S, transferablesOf, type FromWorker, type SpectrogramColumn, type ToWorker, type UpdateMessage, type WorkerStageMs } from './protocol';

declare const self: DedicatedWorkerGlobalScope;

/** Update batches reach the app at most this often, ms (about 15 per second). */
const UPDATE_INTERVAL_MS = 66;
/** Samples per block when a whole file is analysed. */
const FILE_BLOCK_SAMPLES = 4096;
/** Length of the audio chunks handed to the session store, s (it writes a chunk of at most a second at a time: web/storage/audio-writer.ts). */
const AUDIO_CHUNK_S = 1;

interface Run {
  id: number;
  analysis: Analysis;
  sampleRateHz: number;
  samplesSeen: number;
  port: MessagePort | null;
  isKeepingAudio: boolean;
  /** Live blocks not yet analysed (gathered to LIVE_BLOCK_S), and their samples. */
  liveBlocks: Float32Array[];
  liveSamples: number;
  /** Audio kept for the session store: the chunk of AUDIO_CHUNK_S being filled, how much of it is, and the full chunks the next update takes along. */
  audioChunk: Float32Array;
  audioFilled: number;
  audioReady: Float32Array[];
  pendingFrames: TrackFrame[];
  pendingOnsets: Onset[];
  pendingSegments: Segment[];
  pendingMarkers: Marker[];
  spectrum: Float32Array | null;
  spectrumBinHz: number;
  /** Whether the spectrum changed since the last update posted it (an unchanged one is not sent again: the app keeps the last). */
  isSpectrumNew: boolean;
  /** Bins of each spectrogram row for the spectrum's layout (logRowBins), computed once. */
  rowBins: Int32Array;
  peakAbs: number;
  isClipped: boolean;
  lastPostMs: number;
  summary: LiveSummary;
  /** Time spent inside dsp/ push(), ms (for the figures shown after a file). */
  analysisMs: number;
  /** Time spent on each job of the worker, ms (the browser bench's figures). */
  stageMs: WorkerStageMs;
  /** Last frequency of the main tone the track followed, Hz (NaN before any). */
  mainFrequencyHz: number;
  /** Regime of the newest track row (rows come in bursts: most update batches carry none). */
  latestRegime: TrackFrame['state'] | null;
  /** Spectrogram columns not yet posted, the band they span, and the time of the last one, s. */
  pendingColumns: SpectrogramColumn[];
  columnBandHz: [number, number];
  lastColumnS: number;
  /** The growth rate from the noise over the current stretch of steady operation (dsp/live-margin.ts), and when it was last estimated (wall ms). */
  liveMargin: LiveMarginState;
  lastMarginMs: number;
}

/** Band of the analysis when the request does not give one, Hz (dsp/types.ts AnalysisConfig defaults). */
const DEFAULT_BAND_HZ: [number, number] = [20, 4000];

let run: Run | null = null;

function post(message: FromWorker): void {
  self.postMessage(message, transferablesOf(message));
}

function postError(id: number, err: unknown): void {
  const message = err instanceof Error ? err.message : String(err);
  post({ type: 'error', id, message });
}

function createRun(id: number, config: AnalysisConfig, isKeepingAudio: boolean, port: MessagePort | null): Run {
  return {
    id,
    analysis: createAnalysis(config),
    sampleRateHz: config.sampleRateHz,
    samplesSeen: 0,
    port,
    isKeepingAudio,
    liveBlocks: [],
    liveSamples: 0,
    audioChunk: new Float32Array(isKeepingAudio ? Math.max(1, Math.round(AUDIO_CHUNK_S * config.sampleRateHz)) : 0),
    audioFilled: 0,
    audioReady: [],
    pendingFrames: [],
    pendingOnsets: [],
    pendingSegments: [],
    pendingMarkers: [],
    spectrum: null,
    spectrumBinHz: 0,
    isSpectrumNew: false,
    rowBins: new Int32Array(0),
    peakAbs: 0,
    isClipped: false,
    lastPostMs: 0,
    summary: emptyLiveSummary(),
    analysisMs: 0,
    stageMs: { input: 0, analysis: 0, collect: 0, spectrogram: 0, marginFeed: 0, marginEstimate: 0, marginEstimates: 0, marginLatestMs: 0, marginLatestWindowS: 0, audio: 0, update: 0, updates: 0 },
    mainFrequencyHz: Number.NaN,
    latestRegime: null,
    pendingColumns: [],
    columnBandHz: [config.bandLowHz ?? DEFAULT_BAND_HZ[0], Math.min(config.bandHighHz ?? DEFAULT_BAND_HZ[1], config.sampleRateHz / 2)],
    lastColumnS: -Infinity,
    liveMargin: createLiveMargin({ sampleRateHz: config.sampleRateHz }),
    lastMarginMs: -Infinity,
  };
}

/** Keeps the latest spectrum (marked new when it changed) and adds a spectrogram column when one is due. */
function collectSpectrum(r: Run, spectrumDbfs: Float32Array, binHz: number): void {
  if (!r.spectrum || r.spectrum.length !== spectrumDbfs.length || r.spectrumBinHz !== binHz) {
    r.spectrum = new Float32Array(spectrumDbfs.length);
    r.spectrumBinHz = binHz;
    r.rowBins = logRowBins(r.spectrum.length, r.spectrumBinHz, r.columnBandHz[0], r.columnBandHz[1], SPECTROGRAM_ROWS);
    r.isSpectrumNew = true;
  }
  // dsp/ hands back its latest spectrum on every push; most pushes bring no new frame.
  if (r.isSpectrumNew || !sameValues(r.spectrum, spectrumDbfs)) {
    r.spectrum.set(spectrumDbfs);
    r.isSpectrumNew = true;
  }
  // A spectrogram column every SPECTROGRAM_STEP_S of the record, however fast a file is read.
  const timeS = r.samplesSeen / r.sampleRateHz;
  if (timeS - r.lastColumnS >= SPECTROGRAM_STEP_S && binHz > 0) {
    const tc = performance.now();
    const dbfs = new Float32Array(SPECTROGRAM_ROWS);
    reduceWithRowBins(r.spectrum, r.rowBins, dbfs);
    r.pendingColumns.push({ timeS, dbfs });
    r.lastColumnS = timeS;
    // Counted apart from the copies around it.
    const dt = performance.now() - tc;
    r.stageMs.spectrogram += dt;
    r.stageMs.collect -= dt;
  }
}

/**
 * Analyses one block and collects what changed. dsp/ hands over fresh rows, onsets and segments at
 * every push (it starts new ones for the next), so they are kept as they are, not copied.
 */
function pushBlock(r: Run, samples: Float32Array): void {
  const t0 = performance.now();
  const u = r.analysis.push(samples);
  const t1 = performance.now();
  r.analysisMs += t1 - t0;
  r.samplesSeen += samples.length;
  for (const f of u.frames) {
    r.pendingFrames.push(f);
    if (Number.isFinite(f.frequencyHz)) r.mainFrequencyHz = f.frequencyHz;
    r.latestRegime = f.state;
  }
  for (const o of u.onsets) r.pendingOnsets.push(o);
  for (const s of u.segments) r.pendingSegments.push(s);
  if (u.spectrumDbfs) collectSpectrum(r, u.spectrumDbfs, u.spectrumBinHz);
  if (u.peakAbs > r.peakAbs) r.peakAbs = u.peakAbs;
  if (u.isClipped) r.isClipped = true;
  const t2 = performance.now();
  feedLiveMargin(r.liveMargin, samples, u);
  const t3 = performance.now();
  if (r.isKeepingAudio) keepAudio(r, samples);
  const st = r.stageMs;
  st.analysis += t1 - t0;
  st.collect += t2 - t1;
  st.marginFeed += t3 - t2;
  st.audio += performance.now() - t3;
}

function sameValues(a: Float32Array, b: Float32Array): boolean {
  for (let i = 0; i < a.length; i++) if (a[i] !== b[i]) return false;
  return true;
}

/**
 * Copies samples into the audio chunk being filled (the one copy of kept audio: the blocks analysed
 * are the decoder's or the worklet's own); a full chunk waits for the next update to go out with it.
 */
function keepAudio(r: Run, samples: Float32Array): void {
  for (let at = 0; at < samples.length; ) {
    const n = Math.min(samples.length - at, r.audioChunk.length - r.audioFilled);
    r.audioChunk.set(at === 0 && n === samples.length ? samples : samples.subarray(at, at + n), r.audioFilled);
    r.audioFilled += n;
    at += n;
    if (r.audioFilled === r.audioChunk.length) {
      r.audioReady.push(r.audioChunk);
      r.audioChunk = new Float32Array(r.audioChunk.length);
      r.audioFilled = 0;
    }
  }
}

/** The part-filled audio chunk joins the ready ones (at the end of a run). */
function closeAudioChunk(r: Run): void {
  if (r.audioFilled === 0) return;
  r.audioReady.push(r.audioChunk.slice(0, r.audioFilled));
  r.audioFilled = 0;
}

/** Posts the collected changes if enough time has passed (or always, when `isForced`). */
function maybePostUpdate(r: Run, isForced: boolean): void {
  const now = performance.now();
  if (!isForced && now - r.lastPostMs < UPDATE_INTERVAL_MS) return;
  let marginMs = 0;
  r.lastPostMs = now;
  const last = r.pendingFrames.length ? r.pendingFrames[r.pendingFrames.length - 1] : null;
  updateLiveSummary(r.summary, r.pendingSegments, last ? { frequencyHz: last.frequencyHz, regime: last.state } : null, r.mainFrequencyHz);
  const message: UpdateMessage = {
    type: 'update',
    id: r.id,
    samplesAnalysed: r.samplesSeen,
    timeS: r.samplesSeen / r.sampleRateHz,
    frames: r.pendingFrames,
    onsets: r.pendingOnsets,
    segments: r.pendingSegments,
    spectrumDbfs: r.spectrum && r.isSpectrumNew ? r.spectrum.slice() : null,
    spectrumBinHz: r.spectrumBinHz,
    peakAbs: r.peakAbs,
    isClipped: r.isClipped,
    markers: r.pendingMarkers,
    columns: r.pendingColumns,
    columnBandHz: r.columnBandHz,
    // Cloned by the post itself (structured clone copies at once), so the run keeps updating its own.
    summary: r.summary,
    mainFrequencyHz: r.mainFrequencyHz,
    audio: r.audioReady,
  };
  // At most every LIVE_MARGIN_EVERY_S of wall time, so a file read fast is not held up.
  if (isLiveMarginDue(r.liveMargin) && now - r.lastMarginMs >= LIVE_MARGIN_EVERY_S * 1000) {
    r.lastMarginMs = now;
    const tm = performance.now();
    // At the tracked tone while it holds steady (the newest row's regime, not this batch's: a batch often has no rows).
    message.margin = estimateLiveMargin(r.liveMargin, r.latestRegime === 'steady' ? r.mainFrequencyHz : Number.NaN, r.columnBandHz[1]);
    marginMs = performance.now() - tm;
    r.stageMs.marginEstimate += marginMs;
    r.stageMs.marginEstimates++;
    r.stageMs.marginLatestMs = marginMs;
    r.stageMs.marginLatestWindowS = Math.min(r.liveMargin.count, r.liveMargin.capacity) / r.liveMargin.rateHz;
  }
  r.pendingFrames = [];
  r.pendingOnsets = [];
  r.pendingSegments = [];
  r.pendingMarkers = [];
  r.pendingColumns = [];
  if (r.audioReady.length) r.audioReady = [];
  r.peakAbs = 0;
  r.isClipped = false;
  r.isSpectrumNew = false;
  post(message);
  r.stageMs.update += performance.now() - now - marginMs;
  r.stageMs.updates++;
}

function finishRun(r: Run): void {
  if (r.port) {
    r.port.onmessage = null;
    r.port.close();
  }
  flushLiveBlocks(r);
  const ta = performance.now();
  closeAudioChunk(r);
  r.stageMs.audio += performance.now() - ta;
  maybePostUpdate(r, true);
  const t0 = performance.now();
  const report = r.analysis.finish();
  const dt = performance.now() - t0;
  r.analysisMs += dt;
  r.stageMs.analysis += dt;
  post({ type: 'report', id: r.id, report, analysisMs: r.analysisMs, samplesAnalysed: r.samplesSeen, stageMs: r.stageMs });
}

function onPortMessage(r: Run, ev: MessageEvent): void {
  const parsed = parseToWorker(ev.data);
  if (!parsed.ok || parsed.message.type !== 'block') return;
  try {
    gatherLiveBlock(r, parsed.message.samples);
  } catch (err) {
    postError(r.id, err);
  }
}

/** Keeps a live block; analyses the gathered blocks as one once they hold LIVE_BLOCK_S of audio. */
function gatherLiveBlock(r: Run, samples: Float32Array): void {
  r.liveBlocks.push(samples);
  r.liveSamples += samples.length;
  if (r.liveSamples >= LIVE_BLOCK_S * r.sampleRateHz) flushLiveBlocks(r);
}

/** Analyses the live blocks gathered so far (before a gap, a marker or the end, so they keep their order and times). */
function flushLiveBlocks(r: Run): void {
  if (r.liveSamples === 0) return;
  let block = r.liveBlocks[0];
  if (r.liveBlocks.length > 1) {
    const t0 = performance.now();
    block = new Float32Array(r.liveSamples);
    let at = 0;
    for (const b of r.liveBlocks) {
      block.set(b, at);
      at += b.length;
    }
    r.stageMs.input += performance.now() - t0;
  }
  r.liveBlocks = [];
  r.liveSamples = 0;
  pushBlock(r, block);
  maybePostUpdate(r, false);
}

function analyseFile(r: Run, channels: Float32Array[]): void {
  const length = Math.min(...channels.map((c) => c.length));
  const scale = 1 / channels.length;
  // One channel is analysed in place; several are mixed to mono into one reused block.
  const mix = channels.length > 1 ? new Float32Array(FILE_BLOCK_SAMPLES) : null;
  let nextProgress = 0;
  for (let start = 0; start < length; start += FILE_BLOCK_SAMPLES) {
    const n = Math.min(FILE_BLOCK_SAMPLES, length - start);
    const t0 = performance.now();
    let block: Float32Array;
    if (mix) {
      block = mix.subarray(0, n);
      block.fill(0);
      for (const ch of channels) for (let i = 0; i < n; i++) block[i] += ch[start + i] * scale;
    } else {
      block = (channels[0] as Float32Array).subarray(start, start + n);
    }
    r.stageMs.input += performance.now() - t0;
    pushBlock(r, block);
    maybePostUpdate(r, false);
    const fraction = (start + n) / length;
    if (fraction >= nextProgress) {
      post({ type: 'progress', id: r.id, fraction });
      nextProgress = fraction + 0.02;
    }
  }
  post({ type: 'progress', id: r.id, fraction: 1 });
  finishRun(r);
}

/** Feeds decoded samples to the run in blocks of FILE_BLOCK_SAMPLES: views of the decoder's buffer, analysed before its next push reuses it. */
function feedSamples(r: Run, samples: Float32Array): void {
  for (let start = 0; start < samples.length; start += FILE_BLOCK_SAMPLES) {
    pushBlock(r, samples.subarray(start, Math.min(samples.length, start + FILE_BLOCK_SAMPLES)));
    maybePostUpdate(r, false);
  }
}

/**
 * Reads a WAV file as a stream and analyses it as it arrives: memory stays bounded however long
 * the recording. Problems of the file come back as `error` messages naming the file and the problem.
 */
async function analyseWavStream(message: Extract<ToWorker, { type: 'analyse-wav' }>): Promise<void> {
  const { id, file, fileName } = message;
  const decoder = createWavDecoder();
  const reader = file.stream().getReader();
  let r: Run | null = null;
  let bytesRead = 0;
  let nextProgress = 0;
  try {
    for (;;) {
      const { done, value } = await reader.read();
      if (done) break;
      if (run !== r && r !== null) return; // a newer run replaced this one
      bytesRead += value.byteLength;
      const t0 = performance.now();
      const samples = decoder.push(value);
      const decodeMs = performance.now() - t0;
      const format = decoder.format;
      if (!r && format) {
        r = createRun(id, { sampleRateHz: format.sampleRateHz, bandLowHz: message.bandLowHz, bandHighHz: message.bandHighHz, sampleBits: wavSampleBits(format) }, message.isKeepingAudio, null);
        run = r;
        const frames = decoder.declaredFrames;
        post({
          type: 'file-format',
          id,
          sampleRateHz: format.sampleRateHz,
          description: `WAV ${format.encodingName}, ${format.channelCount} channel${format.channelCount === 1 ? '' : 's'}`,
          durationS: frames !== null ? frames / format.sampleRateHz : null,
        });
      }
      if (r) r.stageMs.input += decodeMs;
      if (r && samples.length) feedSamples(r, samples);
      const fraction = file.size > 0 ? bytesRead / file.size : 1;
      if (fraction >= nextProgress) {
        post({ type: 'progress', id, fraction: Math.min(1, fraction) });
        nextProgress = fraction + 0.02;
      }
    }
    decoder.end();
    if (!r) throw new InputError('empty-or-truncated', 'the file ends before its sample data');
    post({ type: 'progress', id, fraction: 1 });
    finishRun(r);
    if (run === r) run = null;
  } catch (err) {
    const problem = err instanceof InputError ? err.problem : undefined;
    const why = err instanceof Error ? err.message : String(err);
    post({ type: 'error', id, message: `“${fileName}” is a WAV file the analysis cannot use: ${why}.`, ...(problem ? { problem } : {}) });
    if (r && run === r) run = null;
  } finally {
    reader.releaseLock();
  }
}

function handle(message: ToWorker): void {
  switch (message.type) {
    case 'start': {
      if (run?.port) run.port.close();
      run = createRun(message.id, message.config, message.isKeepingAudio, message.port ?? null);
      const r = run;
      if (r.port) r.port.onmessage = (ev) => onPortMessage(r, ev);
      post({ type: 'ready', id: message.id });
      return;
    }
    case 'analyse-file': {
      run = createRun(message.id, message.config, message.isKeepingAudio, null);
      post({ type: 'ready', id: message.id });
      analyseFile(run, message.channels);
      return;
    }
    case 'analyse-wav':
      if (run?.port) run.port.close();
      run = null;
      post({ type: 'ready', id: message.id });
      void analyseWavStream(message);
      return;
    default:
      break;
  }
  const r = run;
  if (!r || r.id !== message.id) {
    post({ type: 'error', id: message.id, message: `no analysis run ${message.id} is open` });
    return;
  }
  switch (message.type) {
    case 'block':
      gatherLiveBlock(r, message.samples);
      return;
    case 'gap':
      flushLiveBlocks(r);
      r.analysis.gap(Math.round(message.missingSamples));
      restartLiveMargin(r.liveMargin, Math.round(message.missingSamples));
      r.samplesSeen += Math.round(message.missingSamples);
      return;
    case 'mark': {
      flushLiveBlocks(r);
      const marker: Marker = { ...message.marker, timeS: message.marker.timeS ?? r.samplesSeen / r.sampleRateHz };
      r.analysis.mark(marker);
      r.pendingMarkers.push(marker);
      maybePostUpdate(r, true);
      return;
    }
    case 'finish':
      finishRun(r);
      run = null;
      return;
    default:
      return;
  }
}

self.onmessage = (ev: MessageEvent) => {
  const parsed = parseToWorker(ev.data);
  const id = typeof (ev.data as { id?: unknown })?.id === 'number' ? (ev.data as { id: number }).id : -1;
  if (!parsed.ok) {
    post({ type: 'error', id, message: `The analysis refused a message: ${parsed.reason}.` });
    return;
  }
  try {
    handle(parsed.message);
  } catch (err) {
    postError(id, err);
  }
};
