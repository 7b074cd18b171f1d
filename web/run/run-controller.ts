/**
 * The run controller of the Listen screen: the only part of the screen that talks to the
 * microphone, the analysis worker and the session store. It keeps what the views draw in a
 * LiveModel and tells them of changes through typed events; the views never call capture,
 * worker or storage themselves.
 *
 * The main thread forwards nothing per block: the capture worklet talks to the worker directly,
 * and the views redraw from the model on requestAnimationFrame.
 */
import type { DuctGeometry, Marker, Report } from '../../dsp/types';
import type { NewSessionMeta, SessionRecorder } from '../storage/recording-api';
import { startSessionRecording } from '../storage/recorder';
import { createScope, type Scope } from '../lifecycle';
import { decodeAudioFile, FileProblem, looksLikeWav, type FileOptions } from '../capture/file-input';
import type { FromWorker, ToWorker } from '../worker/protocol';
import { deviceKey, loadSettings, type Calibration } from '../settings';
import { formatSeconds } from '../format';
import { applyUpdate, createLiveModel, resetLiveModel, type InputKind, type LiveModel } from './live-model';
import { captureNotes, captureSettingsOf, CaptureError, openMicRun } from './mic-run';
import { createWorkerClient } from './worker-client';
import { sensorCalibration } from './sensor';

export type RunState = 'idle' | 'starting' | 'listening' | 'file' | 'stopping';

/** What the user gave for the session about to start (the view collects it). */
export interface RunMeta {
  site?: string;
  equipment?: string;
  /** Duct geometry, only when the user chose to attach it (otherwise the session says "not given"). */
  geometry?: DuctGeometry;
  /** False for a check that must not become a session (e.g. a calibrator check). */
  isSaved: boolean;
}

/** The figures of a finished run, for the result panel. */
export interface RunResult {
  report: Report;
  title: string;
  inputKind: InputKind;
  calibration: Calibration | undefined;
  analysisMs: number;
  samplesAnalysed: number;
}

export interface RunEvents {
  state: RunState;
  notes: string[];
  alert: string | null;
  /** Progress of a file: fraction 0–1, or null while it is being decoded; null event hides it. */
  progress: { fraction: number | null; text: string } | null;
  marker: Marker;
  /** A new run starts: views clear what they show of the previous one. */
  reset: null;
  result: RunResult;
  /** The session was stored under this id. */
  saved: string;
  notice: { message: string; kind: 'info' | 'warn' | 'error' };
}

type Listener<K extends keyof RunEvents> = (value: RunEvents[K]) => void;

export interface RunController {
  readonly model: LiveModel;
  readonly state: RunState;
  on<K extends keyof RunEvents>(event: K, fn: Listener<K>): () => void;
  startListening(meta: RunMeta): Promise<void>;
  openFile(file: File, meta: RunMeta, options?: FileOptions): Promise<void>;
  stop(): Promise<void>;
  mark(marker: Omit<Marker, 'timeS'>): void;
}

interface Run {
  id: number;
  inputKind: InputKind;
  scope: Scope;
  meta: RunMeta;
  recorder: SessionRecorder | null;
  /** Work that arrived before the recorder was ready. */
  pendingRecorderWork: ((r: SessionRecorder) => void)[];
  recorderReady: Promise<void>;
  report: Report | null;
  reportWaiters: ((r: Report | null) => void)[];
  /** Name of the opened recording (file runs). */
  fileName: string;
  /** The recording being read in the worker (kept to fall back to the browser's decoder). */
  file: File | null;
  fileOptions: FileOptions;
  analysisMs: number;
  samplesAnalysed: number;
}

/** Creates the controller; nothing is opened until a run starts. */
export function createRunController(): RunController {
  const settings0 = loadSettings();
  const model = createLiveModel(settings0.levelWeighting);
  const listeners = new Map<keyof RunEvents, Set<(v: never) => void>>();
  let state: RunState = 'idle';
  let run: Run | null = null;
  let nextId = 1;

  function emit<K extends keyof RunEvents>(event: K, value: RunEvents[K]): void {
    for (const fn of listeners.get(event) ?? []) (fn as Listener<K>)(value);
  }
  const notify = (message: string, kind: 'info' | 'warn' | 'error'): void => emit('notice', { message, kind });

  const worker = createWorkerClient(onWorkerMessage, (message) => {
    emit('alert', `The analysis stopped with an error: ${message}. What was measured so far is kept.`);
    void stop('error');
  });
  const send = (m: ToWorker): void => worker.send(m);

  function setState(s: RunState): void {
    state = s;
    emit('state', s);
  }

  function withRecorder(work: (r: SessionRecorder) => void): void {
    if (!run || !run.meta.isSaved) return;
    if (run.recorder) work(run.recorder);
    else run.pendingRecorderWork.push(work);
  }

  function onWorkerMessage(m: FromWorker): void {
    const r = run;
    if (!r || m.id !== r.id) return;
    switch (m.type) {
      case 'update': {
        const placed = applyUpdate(model, m);
        for (const mk of placed) emit('marker', mk);
        if (m.frames.length) {
          const frames = m.frames;
          withRecorder((rec) => rec.appendFrames(frames));
        }
        for (const mk of placed) withRecorder((rec) => rec.addMarker(mk));
        return;
      }
      case 'audio': {
        const samples = m.samples;
        // The samples came in this message and nothing else reads them: handed over, not copied.
        withRecorder((rec) => rec.appendAudio(samples, true));
        return;
      }
      case 'progress':
        emit('progress', { fraction: m.fraction, text: `${Math.round(m.fraction * 100)} % analysed` });
        return;
      case 'report':
        r.report = m.report;
        r.analysisMs = m.analysisMs;
        r.samplesAnalysed = m.samplesAnalysed;
        for (const w of r.reportWaiters) w(m.report);
        r.reportWaiters = [];
        if (r.inputKind !== 'microphone') void stop('file-done');
        return;
      case 'file-format':
        emit('notes', [`${r.fileName}: ${m.description}, ${m.sampleRateHz} Hz${m.durationS !== null ? `, ${formatSeconds(m.durationS)}` : ''}.`]);
        openRecorder(r, { source: 'file', fileName: r.fileName, sampleRateHz: m.sampleRateHz, keepAudio: loadSettings().isKeepingAudio });
        return;
      case 'error':
        if (r.inputKind !== 'microphone' && m.problem === 'unsupported-encoding' && r.file) {
          // An encoding our reader does not handle (A-law, ADPCM ...) may still be one the browser decodes.
          const { file, meta, fileOptions } = r;
          void r.scope.dispose();
          run = null;
          setState('idle');
          void decodeAndAnalyse(file, meta, fileOptions);
          return;
        }
        emit('alert', m.problem ? m.message : `The analysis reported a problem: ${m.message}`);
        if (r.inputKind !== 'microphone') void stop('error');
        return;
      default:
        return;
    }
  }

  function newRun(inputKind: InputKind, meta: RunMeta, calibration: Calibration | undefined): Run {
    const s = loadSettings();
    resetLiveModel(model, { inputKind, calibration, isAWeighted: s.isAWeighted, bandLowHz: s.bandLowHz, bandHighHz: s.bandHighHz, weighting: s.levelWeighting });
    emit('reset', null);
    emit('alert', null);
    emit('notes', []);
    return {
      id: nextId++,
      inputKind,
      scope: createScope(),
      meta,
      recorder: null,
      pendingRecorderWork: [],
      recorderReady: Promise.resolve(),
      report: null,
      reportWaiters: [],
      fileName: '',
      file: null,
      fileOptions: {},
      analysisMs: 0,
      samplesAnalysed: 0,
    };
  }

  function openRecorder(r: Run, meta: NewSessionMeta): void {
    if (!r.meta.isSaved) return;
    const { site, equipment, geometry } = r.meta;
    r.recorderReady = openRecorderNow(r, { ...meta, ...(site ? { site } : {}), ...(equipment ? { equipment } : {}), ...(geometry ? { geometry } : {}) });
  }

  async function openRecorderNow(r: Run, meta: NewSessionMeta): Promise<void> {
    try {
      const recorder = await startSessionRecording(meta);
      recorder.onProblem((message) => notify(`Session store: ${message}`, 'warn'));
      r.recorder = recorder;
      for (const work of r.pendingRecorderWork) work(recorder);
      r.pendingRecorderWork = [];
    } catch (err) {
      r.pendingRecorderWork = [];
      notify(`This run is not being saved: ${err instanceof Error ? err.message : String(err)}`, 'warn');
    }
  }

  async function startListening(meta: RunMeta): Promise<void> {
    if (state !== 'idle') return;
    setState('starting');
    const settings = loadSettings();
    const r = newRun('microphone', meta, undefined);
    run = r;
    let sampleRateHz = 0;
    let mic;
    try {
      mic = await openMicRun(r.scope, r.id, {
        isAnalysing: () => run === r && model.timeS > 0,
        onGap: (missingS) => {
          send({ type: 'gap', id: r.id, missingSamples: Math.round(missingS * sampleRateHz) });
          const atS = model.timeS;
          withRecorder((rec) => rec.addGap(atS, missingS));
          notify(`Listening resumed after a gap of ${formatSeconds(missingS)}; the track shows the gap.`, 'info');
        },
        onEnded: () => {
          if (run === r && state === 'listening') {
            notify('The microphone stopped (unplugged or taken by another app). What was measured is kept.', 'warn');
            void stop('ended');
          }
        },
      });
    } catch (err) {
      await r.scope.dispose();
      run = null;
      setState('idle');
      emit('alert', err instanceof CaptureError ? err.message : `The microphone could not be started: ${err instanceof Error ? err.message : String(err)}`);
      notify('The microphone could not be started: see the message below.', 'error');
      return;
    }
    sampleRateHz = mic.sampleRateHz;
    const calibration = settings.calibrations[deviceKey(mic.deviceLabel, mic.deviceId)];
    model.calibration = calibration;
    send({
      type: 'start',
      id: r.id,
      config: { sampleRateHz: mic.sampleRateHz, bandLowHz: settings.bandLowHz, bandHighHz: settings.bandHighHz },
      source: 'microphone',
      isKeepingAudio: settings.isKeepingAudio && meta.isSaved,
      port: mic.workerPort,
    });
    emit('notes', captureNotes(mic, calibration !== undefined));
    if (mic.processingStillOn.length) notify('Audio processing is still on: rates may be falsified.', 'warn');
    openRecorder(r, {
      source: 'microphone',
      sampleRateHz: mic.sampleRateHz,
      calibrationOffsetDb: calibration?.offsetDb,
      calibrationSource: calibration?.source,
      captureSettings: captureSettingsOf(mic),
      keepAudio: settings.isKeepingAudio,
    });
    setState('listening');
  }

  async function openFile(file: File, meta: RunMeta, options: FileOptions = {}): Promise<void> {
    if (state !== 'idle') return;
    if (file.size > 0 && (await looksLikeWav(file))) streamWav(file, meta, options);
    else await decodeAndAnalyse(file, meta, options);
  }

  /** A WAV is read and analysed in the worker as a stream: bounded memory for recordings of any length. */
  function streamWav(file: File, meta: RunMeta, options: FileOptions): void {
    setState('file');
    const r = newRun('sound-file', meta, undefined);
    run = r;
    r.file = file;
    r.fileName = file.name;
    r.fileOptions = options;
    const settings = loadSettings();
    emit('progress', { fraction: 0, text: `Reading “${file.name}”…` });
    send({ type: 'analyse-wav', id: r.id, file, fileName: file.name, bandLowHz: settings.bandLowHz, bandHighHz: settings.bandHighHz, isKeepingAudio: settings.isKeepingAudio && meta.isSaved });
  }

  /** Other files (and WAV encodings our reader lacks): decoded whole on this thread, analysed in the worker. */
  async function decodeAndAnalyse(file: File, meta: RunMeta, options: FileOptions): Promise<void> {
    if (state !== 'idle') return;
    setState('file');
    emit('alert', null);
    emit('progress', { fraction: null, text: `Decoding “${file.name}”…` });
    let decoded;
    try {
      decoded = await decodeAudioFile(file, options);
    } catch (err) {
      // The previous result stays on screen; only the message is new.
      emit('alert', err instanceof FileProblem ? err.message : `“${file.name}” could not be opened: ${err instanceof Error ? err.message : String(err)}`);
      notify('The recording could not be opened: see the message below.', 'error');
      emit('progress', null);
      setState('idle');
      return;
    }
    const calibration = decoded.splOffsetDb !== undefined ? sensorCalibration(decoded.splOffsetDb) : undefined;
    const r = newRun(decoded.isSensor ? 'sensor' : 'sound-file', meta, calibration);
    run = r;
    r.fileName = decoded.fileName;
    const settings = loadSettings();
    emit('notes', [`${decoded.fileName}: ${decoded.decodedBy}, ${decoded.sampleRateHz} Hz, ${formatSeconds(decoded.durationS)}.`, ...decoded.notes]);
    emit('progress', { fraction: 0, text: '0 % analysed' });
    openRecorder(r, {
      source: 'file',
      fileName: decoded.fileName,
      sampleRateHz: decoded.sampleRateHz,
      keepAudio: settings.isKeepingAudio,
      ...(calibration ? { calibrationOffsetDb: calibration.offsetDb, calibrationSource: calibration.source } : {}),
    });
    send({
      type: 'analyse-file',
      id: r.id,
      config: { sampleRateHz: decoded.sampleRateHz, bandLowHz: settings.bandLowHz, bandHighHz: settings.bandHighHz, sampleBits: decoded.sampleBits ?? 0 },
      channels: decoded.channels,
      isKeepingAudio: settings.isKeepingAudio && meta.isSaved,
    });
  }

  function waitForReport(r: Run, timeoutMs: number): Promise<Report | null> {
    if (r.report) return Promise.resolve(r.report);
    return new Promise((resolve) => {
      const timer = setTimeout(() => resolve(null), timeoutMs);
      r.reportWaiters.push((rep) => {
        clearTimeout(timer);
        resolve(rep);
      });
    });
  }

  async function stop(why: 'user' | 'ended' | 'error' | 'file-done' = 'user'): Promise<void> {
    const r = run;
    if (!r || state === 'stopping') return;
    setState('stopping');
    // Capture first (worklet, microphone, context), then ask the worker for the report.
    const problems = await r.scope.dispose();
    if (problems.length) notify(`While stopping: ${problems.join('; ')}`, 'warn');
    if (r.inputKind === 'microphone' && why !== 'error') send({ type: 'finish', id: r.id });
    const report = why === 'error' ? null : await waitForReport(r, 20_000);
    emit('progress', null);
    // A short file can finish before the session store has opened: wait for it (bounded).
    await Promise.race([r.recorderReady, new Promise((resolve) => setTimeout(resolve, 10_000))]);
    if (report) {
      emit('result', {
        report,
        title: r.inputKind === 'microphone' ? 'Result of this run' : `Result of ${r.fileName}`,
        inputKind: r.inputKind,
        calibration: model.calibration,
        analysisMs: r.analysisMs,
        samplesAnalysed: r.samplesAnalysed,
      });
      if (r.recorder) {
        try {
          await r.recorder.finish(report);
          notify(`Session saved (${formatSeconds(report.durationS)}).`, 'info');
          emit('saved', r.recorder.id);
        } catch (err) {
          notify(`The session could not be completed: ${err instanceof Error ? err.message : String(err)}`, 'error');
        }
      } else if (!r.meta.isSaved) {
        notify('Check finished; it was not saved as a session.', 'info');
      }
    } else if (why !== 'error') {
      emit('alert', 'The analysis did not return a result in time; the track shown so far is kept in the session.');
    }
    run = null;
    setState('idle');
  }

  return {
    model,
    get state() {
      return state;
    },
    on(event, fn) {
      let set = listeners.get(event);
      if (!set) listeners.set(event, (set = new Set()));
      set.add(fn as (v: never) => void);
      return () => set.delete(fn as (v: never) => void);
    },
    startListening,
    openFile,
    stop: () => stop('user'),
    mark(marker) {
      if (!run || state !== 'listening') return;
      send({ type: 'mark', id: run.id, marker });
    },
  };
}
