/**
 * The Listen screen: live capture from the microphone (or an opened recording) analysed in the
 * worker, with big readouts, markers, plots and the final figures once stopped.
 * The main thread forwards nothing per block: the worklet talks to the worker directly, and the
 * views redraw from ring buffers on requestAnimationFrame.
 */
import type { MountScreen } from '../app-context';
import type { DuctGeometry, Report } from '../../dsp/types';
import type { NewSessionMeta, SessionRecorder } from '../storage/recording-api';
import { startSessionRecording } from '../storage/recorder';
import { createScope, type Scope } from '../lifecycle';
import { CaptureError, keepScreenAwake, openMicrophone, PROCESSING_KEYS, type MicCapture } from '../capture/mic';
import { decodeAudioFile, FileProblem, looksLikeWav } from '../capture/file-input';
import { missingSeconds, type ClockPair } from '../capture/gap';
import { isFromWorker, transferablesOf, type FromWorker, type ToWorker, type UpdateMessage } from '../worker/protocol';
import { emptyLiveSummary, isSameTone, type LiveSummary } from '../worker/live-summary';
import { appendFrames, createLiveBuffer, resetLiveBuffer, type LiveBuffer } from './live-buffer';
import { createLivePlots, type LivePlots } from './live-plots';
import { createSpectrogram, type Spectrogram } from './live-spectrogram';
import { createReadouts, type Readouts } from './live-readouts';
import { createMarkerBar, type MarkerBar } from './live-markers';
import { deviceKey, loadSettings, type Calibration } from '../settings';
import { formatClock, formatSeconds } from '../format';
import { el, loadJson, saveJson } from './dom';

/** Rows of track kept on screen: 100 rows/s for 10 minutes. */
const BUFFER_ROWS = 60_000;
/** localStorage key where the duct screen keeps the geometry. */
const GEOMETRY_KEY = 'humgauge.ductGeometry';

type RunState = 'idle' | 'starting' | 'listening' | 'file' | 'stopping';

interface Run {
  id: number;
  source: 'microphone' | 'file';
  scope: Scope;
  mic: MicCapture | null;
  recorder: SessionRecorder | null;
  /** Frames that arrived before the recorder was ready. */
  pendingRecorderWork: ((r: SessionRecorder) => void)[];
  /** Settles once the session recorder is open (or failed to open). */
  recorderReady: Promise<void>;
  calibration: Calibration | undefined;
  report: Report | null;
  reportWaiters: ((r: Report | null) => void)[];
  /** Name of the opened recording (file runs). */
  decodedBy: string;
  /** The recording being read in the worker (kept to fall back to the browser's decoder). */
  file: File | null;
  analysisMs: number;
  samplesAnalysed: number;
}

function readGeometry(): DuctGeometry | undefined {
  try {
    const raw = localStorage.getItem(GEOMETRY_KEY);
    if (!raw) return undefined;
    const g = JSON.parse(raw) as Partial<DuctGeometry>;
    const isPositive = (v: unknown): boolean => typeof v === 'number' && Number.isFinite(v) && v > 0;
    if (!isPositive(g.lengthM) || !isPositive(g.diameterM) || typeof g.gasTemperatureC !== 'number' || !Number.isFinite(g.gasTemperatureC)) return undefined;
    if (g.ends !== 'open-open' && g.ends !== 'open-closed' && g.ends !== 'closed-closed') return undefined;
    if (g.openEnd !== 'unflanged' && g.openEnd !== 'flanged' && g.openEnd !== 'none') return undefined;
    return g as DuctGeometry;
  } catch {
    return undefined;
  }
}

/** True when a spectrum holds sound rather than digital silence (a bin above −130 dBFS, under 16-bit dither). */
function hasSound(spectrumDbfs: Float32Array): boolean {
  for (let i = 0; i < spectrumDbfs.length; i++) if ((spectrumDbfs[i] ?? -Infinity) > -130) return true;
  return false;
}

const LABELS_KEY = 'humgauge.sessionLabels';


export const mountListenScreen: MountScreen = (root, app) => {
  const buffer: LiveBuffer = createLiveBuffer(BUFFER_ROWS);
  let summary: LiveSummary = emptyLiveSummary();
  let state: RunState = 'idle';
  let run: Run | null = null;
  let nextId = 1;
  let worker: Worker | null = null;
  let plots: LivePlots | null = null;
  let spectrogram: Spectrogram | null = null;
  let rafId = 0;
  let latestLevelDbfs = Number.NaN;
  let latestToneDbfs = Number.NaN;
  let peakAbs = 0;
  let clipUntilMs = 0;
  let timeS = 0;
  let isAWeighted = loadSettings().isAWeighted;
  let bandHighHz = loadSettings().bandHighHz;
  let bandLowHz = loadSettings().bandLowHz;

  // --- layout -------------------------------------------------------------------------------
  const listenButton = el('button', { type: 'button', className: 'big-button primary', id: 'listen-button', textContent: 'Listen' });
  const fileInput = el('input', { type: 'file', accept: 'audio/*,.wav,.csv,.txt', id: 'file-input', className: 'visually-hidden' });
  const fileLabel = el('label', { htmlFor: 'file-input', className: 'big-button secondary', id: 'file-button', textContent: 'Open recording' });
  const clock = el('span', { className: 'clock', id: 'run-clock', textContent: '0:00.0' });
  clock.setAttribute('aria-label', 'time since start');
  // The input sits before its label so the label can show the keyboard focus (see styles.css).
  const controls = el('div', { className: 'controls' }, listenButton, fileInput, fileLabel, clock);

  // Site and equipment travel with every session started here (kept for the next visit).
  const labels = loadJson(LABELS_KEY, { site: '', equipment: '' });
  const siteInput = el('input', { type: 'text', id: 'session-site', maxLength: 120, value: String(labels.site), placeholder: 'e.g. bench rig 2' });
  const equipmentInput = el('input', { type: 'text', id: 'session-equipment', maxLength: 120, value: String(labels.equipment), placeholder: 'e.g. heated tube, 1 m' });
  const saveLabels = (): void => saveJson(LABELS_KEY, { site: siteInput.value, equipment: equipmentInput.value });
  siteInput.addEventListener('change', saveLabels);
  equipmentInput.addEventListener('change', saveLabels);
  const labelRow = el(
    'div',
    { className: 'session-labels' },
    el('label', { htmlFor: 'session-site', textContent: 'Site' }),
    siteInput,
    el('label', { htmlFor: 'session-equipment', textContent: 'Equipment' }),
    equipmentInput,
  );

  const meterBar = el('div', { className: 'meter-bar' });
  const meter = el('div', { className: 'meter', id: 'input-meter' }, meterBar);
  meter.setAttribute('role', 'meter');
  meter.setAttribute('aria-label', 'input level');
  meter.setAttribute('aria-valuemin', '-90');
  meter.setAttribute('aria-valuemax', '0');
  const clipBadge = el('span', { className: 'clip-badge', id: 'clip-warning', textContent: 'CLIPPING: move away or lower the input' });
  clipBadge.hidden = true;
  const meterRow = el('div', { className: 'meter-row' }, meter, clipBadge);

  const progress = el('progress', { id: 'file-progress', max: 1, value: 0 });
  progress.setAttribute('aria-label', 'analysis of the file');
  const progressText = el('span', { id: 'file-progress-text' });
  const progressRow = el('div', { className: 'progress-row' }, progress, progressText);
  progressRow.hidden = true;

  const alertBox = el('div', { className: 'alert', id: 'listen-alert' });
  alertBox.setAttribute('role', 'alert');
  alertBox.hidden = true;
  const notes = el('ul', { className: 'notes', id: 'listen-notes' });
  notes.setAttribute('aria-live', 'polite');

  const readoutHost = el('div', { className: 'readouts', id: 'readouts' });
  const markerHost = el('div', { className: 'markers', id: 'marker-bar' });
  const plotHost = el('div', { className: 'plots', id: 'plots' });
  const resultHost = el('section', { className: 'result', id: 'run-result' });
  resultHost.setAttribute('aria-label', 'result of the run');
  resultHost.hidden = true;

  root.append(el('h2', { className: 'visually-hidden', textContent: 'Listen' }), controls, labelRow, meterRow, progressRow, alertBox, notes, readoutHost, markerHost, plotHost, resultHost);

  const readouts: Readouts = createReadouts(readoutHost);
  const markers: MarkerBar = createMarkerBar(markerHost, (m) => {
    if (!run || state !== 'listening') return;
    send({ type: 'mark', id: run.id, marker: m });
  });
  markers.setEnabled(false);

  // --- messages --------------------------------------------------------------------------
  function showAlert(message: string | null): void {
    alertBox.textContent = message ?? '';
    alertBox.hidden = !message;
  }

  function setNotes(items: string[]): void {
    notes.replaceChildren(...items.map((t) => el('li', { textContent: t })));
  }

  function send(message: ToWorker): void {
    ensureWorker().postMessage(message, transferablesOf(message));
  }

  function ensureWorker(): Worker {
    if (worker) return worker;
    const w = new Worker(new URL('../worker/analysis.worker.ts', import.meta.url), { type: 'module', name: 'analysis' });
    w.onmessage = (ev: MessageEvent) => {
      if (isFromWorker(ev.data)) onWorkerMessage(ev.data);
    };
    w.onerror = (ev) => {
      ev.preventDefault();
      // A worker that threw at top level is not trusted again: the next run starts a fresh one.
      w.terminate();
      if (worker === w) worker = null;
      showAlert(`The analysis stopped with an error: ${ev.message || 'unknown'}. What was measured so far is kept.`);
      void stop('error');
    };
    worker = w;
    return w;
  }

  function withRecorder(work: (r: SessionRecorder) => void): void {
    if (!run) return;
    if (run.recorder) work(run.recorder);
    else run.pendingRecorderWork.push(work);
  }

  function onWorkerMessage(m: FromWorker): void {
    if (!run || m.id !== run.id) return;
    switch (m.type) {
      case 'ready':
        return;
      case 'update':
        onUpdate(m);
        return;
      case 'audio': {
        const samples = m.samples;
        withRecorder((r) => r.appendAudio(samples));
        return;
      }
      case 'progress':
        progress.value = m.fraction;
        progressText.textContent = `${Math.round(m.fraction * 100)} % analysed`;
        return;
      case 'report': {
        run.report = m.report;
        run.analysisMs = m.analysisMs;
        run.samplesAnalysed = m.samplesAnalysed;
        for (const w of run.reportWaiters) w(m.report);
        run.reportWaiters = [];
        if (run.source === 'file') void stop('file-done');
        return;
      }
      case 'file-format':
        onFileFormat(run, m.sampleRateHz, m.description, m.durationS);
        return;
      case 'error': {
        const r = run;
        if (r.source === 'file' && m.problem === 'unsupported-encoding' && r.file) {
          // An encoding our reader does not handle (A-law, ADPCM ...) may still be one the browser decodes.
          const file = r.file;
          void r.scope.dispose();
          run = null;
          setState('idle');
          void decodeAndAnalyse(file);
          return;
        }
        showAlert(m.problem ? m.message : `The analysis reported a problem: ${m.message}`);
        if (r.source === 'file') void stop('error');
        return;
      }
      default:
        return;
    }
  }

  function onUpdate(m: UpdateMessage): void {
    appendFrames(buffer, m.frames);
    // Plot the fits of the main tone only; weaker candidate tones have segments of their own.
    for (const s of m.segments) if (isSameTone(s.frequencyHz, m.mainFrequencyHz)) buffer.segments.push(s);
    for (const mk of m.markers) {
      buffer.markers.push(mk);
      markers.addPlaced(mk);
    }
    if (m.spectrumDbfs && hasSound(m.spectrumDbfs)) {
      buffer.spectrumDbfs = m.spectrumDbfs;
      buffer.spectrumBinHz = m.spectrumBinHz;
      buffer.spectrumCount++;
    }
    buffer.version++;
    summary = m.summary;
    timeS = m.timeS;
    const last = m.frames[m.frames.length - 1];
    if (last) {
      latestLevelDbfs = last.levelDbfs;
      latestToneDbfs = last.amplitudeDbfs;
    }
    peakAbs = m.peakAbs;
    if (m.isClipped) clipUntilMs = performance.now() + 2000;
    if (m.frames.length) {
      const frames = m.frames;
      withRecorder((r) => r.appendFrames(frames));
    }
    for (const mk of m.markers) withRecorder((r) => r.addMarker(mk));
  }

  // --- drawing ---------------------------------------------------------------------------
  function frame(): void {
    rafId = requestAnimationFrame(frame);
    plots?.draw();
    spectrogram?.draw();
    readouts.update({ summary, levelDbfs: latestLevelDbfs, toneDbfs: latestToneDbfs, calibration: run?.calibration, isAWeighted });
    const peakDb = peakAbs > 0 ? 20 * Math.log10(peakAbs) : -90;
    const pct = Math.max(0, Math.min(100, ((peakDb + 90) / 90) * 100));
    meterBar.style.width = `${pct.toFixed(1)}%`;
    meter.setAttribute('aria-valuenow', peakDb.toFixed(0));
    clipBadge.hidden = performance.now() > clipUntilMs;
    clock.textContent = formatClock(timeS);
  }

  function startDrawing(): void {
    if (!plots) {
      plots = createLivePlots(plotHost, buffer, () => bandHighHz);
      spectrogram = createSpectrogram(plotHost, buffer, () => [bandLowHz, bandHighHz]);
      spectrogram.clear();
    }
    if (!rafId) rafId = requestAnimationFrame(frame);
  }

  function stopDrawing(): void {
    if (rafId) cancelAnimationFrame(rafId);
    rafId = 0;
    // One last full draw so the final state stays on screen.
    buffer.version++;
    plots?.draw();
    readouts.update({ summary, levelDbfs: latestLevelDbfs, toneDbfs: latestToneDbfs, calibration: run?.calibration, isAWeighted });
    clock.textContent = formatClock(timeS);
  }

  // --- runs ------------------------------------------------------------------------------
  function newRun(source: 'microphone' | 'file'): Run {
    resetLiveBuffer(buffer);
    markers.clearPlaced();
    summary = emptyLiveSummary();
    latestLevelDbfs = Number.NaN;
    latestToneDbfs = Number.NaN;
    peakAbs = 0;
    timeS = 0;
    resultHost.hidden = true;
    resultHost.replaceChildren();
    showAlert(null);
    setNotes([]);
    return {
      id: nextId++,
      source,
      scope: createScope(),
      mic: null,
      recorder: null,
      pendingRecorderWork: [],
      recorderReady: Promise.resolve(),
      calibration: undefined,
      report: null,
      reportWaiters: [],
      decodedBy: '',
      file: null,
      analysisMs: 0,
      samplesAnalysed: 0,
    };
  }

  function openRecorder(r: Run, meta: NewSessionMeta): void {
    const site = siteInput.value.trim();
    const equipment = equipmentInput.value.trim();
    r.recorderReady = openRecorderNow(r, { ...meta, ...(site ? { site } : {}), ...(equipment ? { equipment } : {}) });
  }

  async function openRecorderNow(r: Run, meta: NewSessionMeta): Promise<void> {
    try {
      const recorder = await startSessionRecording(meta);
      recorder.onProblem((message) => app.notify(`Session store: ${message}`, 'warn'));
      r.recorder = recorder;
      for (const work of r.pendingRecorderWork) work(recorder);
      r.pendingRecorderWork = [];
    } catch (err) {
      r.pendingRecorderWork = [];
      app.notify(`This run is not being saved: ${err instanceof Error ? err.message : String(err)}`, 'warn');
    }
  }

  function setState(s: RunState): void {
    state = s;
    root.dataset.state = s;
    listenButton.textContent = s === 'listening' ? 'Stop' : s === 'starting' ? 'Starting…' : s === 'stopping' ? 'Stopping…' : 'Listen';
    listenButton.classList.toggle('stop', s === 'listening');
    listenButton.disabled = s === 'starting' || s === 'stopping' || s === 'file';
    listenButton.setAttribute('aria-pressed', String(s === 'listening'));
    fileInput.disabled = s !== 'idle';
    fileLabel.classList.toggle('disabled', s !== 'idle');
    markers.setEnabled(s === 'listening');
  }

  async function startListening(): Promise<void> {
    if (state !== 'idle') return;
    setState('starting');
    const r = newRun('microphone');
    run = r;
    const settings = loadSettings();
    isAWeighted = settings.isAWeighted;
    bandHighHz = settings.bandHighHz;
    bandLowHz = settings.bandLowHz;
    spectrogram?.clear();
    let mic: MicCapture;
    try {
      mic = await openMicrophone(r.scope, r.id);
    } catch (err) {
      await r.scope.dispose();
      run = null;
      setState('idle');
      stopDrawing();
      const message = err instanceof CaptureError ? err.message : `The microphone could not be started: ${err instanceof Error ? err.message : String(err)}`;
      showAlert(message);
      app.notify('The microphone could not be started: see the message below.', 'error');
      return;
    }
    r.mic = mic;
    r.calibration = settings.calibrations[deviceKey(mic.deviceLabel, mic.deviceId)];
    send({
      type: 'start',
      id: r.id,
      config: { sampleRateHz: mic.sampleRateHz, bandLowHz: settings.bandLowHz, bandHighHz: settings.bandHighHz },
      source: 'microphone',
      isKeepingAudio: settings.isKeepingAudio,
      port: mic.workerPort,
    });

    const captureNotes: string[] = [`Microphone: ${mic.deviceLabel}, ${mic.sampleRateHz} Hz.`];
    if (mic.processingStillOn.length) {
      captureNotes.push(
        `The browser keeps ${mic.processingStillOn.join(', ')} switched ON although asked to turn it off: growth and decay rates may be falsified. Try another browser or an external microphone.`,
      );
    }
    if (!r.calibration) captureNotes.push('Not calibrated: levels read in dBFS (see Settings to calibrate).');
    setNotes(captureNotes);
    if (mic.processingStillOn.length) app.notify('Audio processing is still on: rates may be falsified.', 'warn');

    // Track ended (device unplugged, permission revoked): stop cleanly and keep what was measured.
    r.scope.listen(mic.track, 'ended', () => {
      if (run === r && state === 'listening') {
        app.notify('The microphone stopped (unplugged or taken by another app). What was measured is kept.', 'warn');
        void stop('ended');
      }
    });
    // Context suspended or page frozen (tab hidden, phone call, screen off): the audio clock stops
    // while the wall clock runs on. The difference is marked as a gap so fits do not join across it.
    const ctx = mic.context;
    // The clocks are compared only from the first analysed block on: start-up latency (permission,
    // worklet loading, the device opening) is not lost input and must not be marked as a gap.
    let reference: ClockPair | null = null;
    const checkForGap = (): void => {
      if (ctx.state !== 'running' || run !== r || r.samplesAnalysed === 0) return;
      const now: ClockPair = { wallMs: performance.now(), audioS: ctx.currentTime };
      if (!reference) {
        reference = now;
        return;
      }
      const missingS = missingSeconds(reference, now);
      reference = now;
      if (missingS <= 0) return;
      send({ type: 'gap', id: r.id, missingSamples: Math.round(missingS * mic.sampleRateHz) });
      const atS = timeS;
      withRecorder((rec) => rec.addGap(atS, missingS));
      app.notify(`Listening resumed after a gap of ${formatSeconds(missingS)}; the track shows the gap.`, 'info');
    };
    r.scope.listen(ctx, 'statechange', () => {
      if (ctx.state === 'running') checkForGap();
    });
    r.scope.listen(document, 'visibilitychange', () => {
      if (document.visibilityState !== 'visible') return;
      if (ctx.state !== 'running' && ctx.state !== 'closed') void ctx.resume().catch(() => undefined);
      else checkForGap();
    });
    // A freeze may end without any event reaching us; a slow timer catches it (one comparison, no audio work).
    const timer = setInterval(checkForGap, 2000);
    r.scope.add(() => clearInterval(timer));
    void keepScreenAwake(r.scope);

    const captureSettings: Record<string, unknown> = { ...mic.settings };
    for (const k of PROCESSING_KEYS) captureSettings[`${k}Requested`] = false;
    openRecorder(r, {
      source: 'microphone',
      sampleRateHz: mic.sampleRateHz,
      geometry: readGeometry(),
      calibrationOffsetDb: r.calibration?.offsetDb,
      calibrationSource: r.calibration?.source,
      captureSettings,
      keepAudio: settings.isKeepingAudio,
    });
    setState('listening');
    startDrawing();
  }

  async function openFile(file: File): Promise<void> {
    if (state !== 'idle') return;
    if (file.size > 0 && (await looksLikeWav(file))) streamWav(file);
    else await decodeAndAnalyse(file);
  }

  /** A WAV is read and analysed in the worker as a stream: bounded memory for recordings of any length. */
  function streamWav(file: File): void {
    setState('file');
    const r = newRun('file');
    run = r;
    r.file = file;
    r.decodedBy = file.name;
    const settings = loadSettings();
    bandHighHz = settings.bandHighHz;
    bandLowHz = settings.bandLowHz;
    spectrogram?.clear();
    progressRow.hidden = false;
    progress.value = 0;
    progressText.textContent = `Reading “${file.name}”…`;
    startDrawing();
    send({ type: 'analyse-wav', id: r.id, file, fileName: file.name, bandLowHz: settings.bandLowHz, bandHighHz: settings.bandHighHz, isKeepingAudio: settings.isKeepingAudio });
  }

  function onFileFormat(r: Run, sampleRateHz: number, description: string, durationS: number | null): void {
    const settings = loadSettings();
    setNotes([`${r.decodedBy}: ${description}, ${sampleRateHz} Hz${durationS !== null ? `, ${formatSeconds(durationS)}` : ''}.`]);
    openRecorder(r, { source: 'file', fileName: r.decodedBy, sampleRateHz, geometry: readGeometry(), keepAudio: settings.isKeepingAudio });
  }

  /** Other files (and WAV encodings our reader lacks): decoded whole on this thread, analysed in the worker. */
  async function decodeAndAnalyse(file: File): Promise<void> {
    if (state !== 'idle') return;
    setState('file');
    showAlert(null);
    progressRow.hidden = false;
    progress.removeAttribute('value');
    progressText.textContent = `Decoding “${file.name}”…`;
    let decoded;
    try {
      decoded = await decodeAudioFile(file);
    } catch (err) {
      // The previous result stays on screen; only the message is new.
      const message = err instanceof FileProblem ? err.message : `“${file.name}” could not be opened: ${err instanceof Error ? err.message : String(err)}`;
      showAlert(message);
      app.notify('The recording could not be opened: see the message below.', 'error');
      progressRow.hidden = true;
      setState('idle');
      return;
    }
    const r = newRun('file');
    run = r;
    r.decodedBy = decoded.fileName;
    const settings = loadSettings();
    bandHighHz = settings.bandHighHz;
    bandLowHz = settings.bandLowHz;
    spectrogram?.clear();
    setNotes([`${decoded.fileName}: ${decoded.decodedBy}, ${decoded.sampleRateHz} Hz, ${formatSeconds(decoded.durationS)}.`, ...decoded.notes]);
    progress.value = 0;
    progressText.textContent = '0 % analysed';
    openRecorder(r, {
      source: 'file',
      fileName: decoded.fileName,
      sampleRateHz: decoded.sampleRateHz,
      geometry: readGeometry(),
      keepAudio: settings.isKeepingAudio,
    });
    startDrawing();
    send({
      type: 'analyse-file',
      id: r.id,
      config: { sampleRateHz: decoded.sampleRateHz, bandLowHz: settings.bandLowHz, bandHighHz: settings.bandHighHz },
      channels: decoded.channels,
      isKeepingAudio: settings.isKeepingAudio,
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

  async function stop(why: 'user' | 'ended' | 'error' | 'file-done'): Promise<void> {
    const r = run;
    if (!r || state === 'stopping') return;
    setState('stopping');
    // Capture first (worklet, microphone, context), then ask the worker for the report.
    const problems = await r.scope.dispose();
    if (problems.length) app.notify(`While stopping: ${problems.join('; ')}`, 'warn');
    if (r.source === 'microphone' && why !== 'error') send({ type: 'finish', id: r.id });
    const report = why === 'error' ? null : await waitForReport(r, 20_000);
    stopDrawing();
    progressRow.hidden = true;
    // A short file can finish before the session store has opened: wait for it (bounded).
    await Promise.race([r.recorderReady, new Promise((resolve) => setTimeout(resolve, 10_000))]);
    if (report) {
      showResult(r, report);
      if (r.recorder) {
        try {
          await r.recorder.finish(report);
          const id = r.recorder.id;
          app.notify(`Session saved (${formatSeconds(report.durationS)}).`, 'info');
          resultHost.append(el('p', {}, el('a', { href: `#sessions/${encodeURIComponent(id)}`, className: 'big-link', textContent: 'Open this session' })));
        } catch (err) {
          app.notify(`The session could not be completed: ${err instanceof Error ? err.message : String(err)}`, 'error');
        }
      }
    } else if (why !== 'error') {
      showAlert('The analysis did not return a result in time; the track shown so far is kept in the session.');
    }
    run = null;
    setState('idle');
  }

  function showResult(r: Run, report: Report): void {
    // The final figures come from the report (the whole record), which may refine the live ones.
    summary = {
      ...summary,
      ...report.summary,
      latestFrequencyHz: report.summary.frequencyHz ?? summary.latestFrequencyHz,
    };
    readouts.update({ summary, levelDbfs: latestLevelDbfs, toneDbfs: latestToneDbfs, calibration: r.calibration, isAWeighted, isFinal: true });
    resultHost.replaceChildren(...readouts.renderReport(report, r.source === 'file' ? `Result of ${r.decodedBy}` : 'Result of this run'));
    if (r.samplesAnalysed > 0 && report.sampleRateHz > 0) {
      // Cost of the analysis on this device: ms of computing per second of audio.
      const audioS = r.samplesAnalysed / report.sampleRateHz;
      const cost = el('p', { className: 'hint', id: 'analysis-cost' });
      cost.dataset.analysisMs = String(r.analysisMs);
      cost.dataset.audioS = String(audioS);
      cost.textContent = `Analysis took ${formatSeconds(r.analysisMs / 1000)} for ${formatSeconds(audioS)} of audio (${formatSeconds(r.analysisMs / 1000 / audioS)} per second of audio) on this device.`;
      resultHost.append(cost);
    }
    resultHost.hidden = false;
  }

  // --- wiring ----------------------------------------------------------------------------
  listenButton.addEventListener('click', () => {
    if (state === 'listening') void stop('user');
    else void startListening();
  });
  fileInput.addEventListener('change', () => {
    const file = fileInput.files?.[0];
    fileInput.value = '';
    if (file) void openFile(file);
  });
  window.addEventListener('resize', () => plots?.resize());
  app.onShow('listen', () => {
    plots?.resize();
    buffer.version++;
    plots?.draw();
  });
  setState('idle');
  startDrawing();
  stopDrawing();
};
