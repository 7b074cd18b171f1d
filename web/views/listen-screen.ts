/**
 * The Listen screen: what a run shows (verdict, readouts, markers, plots, the final figures) and
 * the controls that start one. Everything with side effects (microphone, analysis worker,
 * session store) lives in the run controller (web/run/run-controller.ts); this view draws the
 * controller's model on requestAnimationFrame and passes the user's choices on.
 */
import type { MountScreen } from '../app-context';
import { createRunController, type RunMeta, type RunResult, type RunState } from '../run/run-controller';
import { liveLevels } from '../run/live-model';
import { readDuctScreenGeometry, describeGeometry } from '../run/geometry';
import type { FileOptions } from '../capture/file-input';
import { MAX_SAMPLE_RATE_HZ, MIN_SAMPLE_RATE_HZ } from '../worker/protocol';
import { createLivePlots, type LivePlots } from './live-plots';
import { createSpectrogram, type Spectrogram } from './live-spectrogram';
import { createReadouts } from './live-readouts';
import { createLiveMarginView } from './live-margin-view';
import { createMarkerBar } from './live-markers';
import { renderRunResult } from './run-result';
import { formatClock } from '../format';
import { el, loadJson, saveJson } from './dom';

/** Sites and equipment typed before, offered as suggestions (never filled in by themselves). */
const LABELS_KEY = 'humgauge.sessionLabels';
const MAX_SUGGESTIONS = 12;

interface LabelHistory {
  sites: string[];
  equipment: string[];
}

function remember(list: string[], value: string): string[] {
  const v = value.trim();
  if (!v) return list;
  return [v, ...list.filter((x) => x !== v)].slice(0, MAX_SUGGESTIONS);
}

/** A text field with suggestions from earlier sessions. */
function suggestingInput(id: string, placeholder: string, suggestions: string[]): { input: HTMLInputElement; list: HTMLDataListElement } {
  const list = el('datalist', { id: `${id}-suggestions` }, ...suggestions.map((s) => el('option', { value: s })));
  const input = el('input', { type: 'text', id, maxLength: 120, placeholder, autocomplete: 'off', attrs: { list: list.id } });
  return { input, list };
}

export const mountListenScreen: MountScreen = (root, app) => {
  const controller = createRunController();
  const model = controller.model;
  let plots: LivePlots | null = null;
  let spectrogram: Spectrogram | null = null;
  let rafId = 0;

  // --- controls ---------------------------------------------------------------------------
  const listenButton = el('button', { type: 'button', className: 'big-button primary', id: 'listen-button', text: 'Listen' });
  const fileInput = el('input', { type: 'file', accept: 'audio/*,.wav,.csv,.txt', id: 'file-input', className: 'visually-hidden' });
  const fileLabel = el('label', { htmlFor: 'file-input', className: 'big-button secondary', id: 'file-button', text: 'Open recording' });
  const clock = el('span', { className: 'clock', id: 'run-clock', text: '0:00.0', attrs: { 'aria-label': 'time since start' } });
  // The input sits before its label so the label can show the keyboard focus (see styles.css).
  const controls = el('div', { className: 'controls' }, listenButton, fileInput, fileLabel, clock);

  // Site and equipment: empty at each start (a new job does not inherit the last one's site);
  // what was typed before is offered as a suggestion.
  // Stored lists are checked item by item (an older layout kept one site and one equipment text).
  const stored = loadJson<Partial<Record<keyof LabelHistory, unknown>>>(LABELS_KEY, {});
  const textsOf = (v: unknown): string[] => (Array.isArray(v) ? v.filter((x): x is string => typeof x === 'string') : []);
  const history: LabelHistory = { sites: textsOf(stored.sites), equipment: textsOf(stored.equipment) };
  const site = suggestingInput('session-site', 'e.g. bench rig 2', history.sites);
  const equipment = suggestingInput('session-equipment', 'e.g. heated tube, 1 m', history.equipment);
  const ductBox = el('input', { type: 'checkbox', id: 'session-attach-duct' });
  const ductText = el('span', { id: 'session-duct-text' });
  const saveBox = el('input', { type: 'checkbox', id: 'session-save', checked: true });
  const labelRow = el(
    'div',
    { className: 'session-labels' },
    el('label', { htmlFor: 'session-site', text: 'Site' }),
    site.input,
    site.list,
    el('label', { htmlFor: 'session-equipment', text: 'Equipment' }),
    equipment.input,
    equipment.list,
  );
  const optionRow = el(
    'div',
    { className: 'session-options' },
    el('label', { className: 'check' }, ductBox, ductText),
    el('label', { className: 'check' }, saveBox, el('span', { text: 'Save as a session (untick for a calibrator check or a trial)' })),
  );
  const renderDuctChoice = (): void => {
    const g = readDuctScreenGeometry();
    ductBox.disabled = !g;
    if (!g) ductBox.checked = false;
    ductText.textContent = g ? `Attach the Duct screen’s geometry (${describeGeometry(g)})` : 'Duct geometry: not given (set it on the Duct screen to attach it)';
  };
  renderDuctChoice();

  // Sensor files: a one-column CSV has no time column, so its rate is typed here.
  const csvRate = el('input', { type: 'text', inputMode: 'decimal', id: 'csv-rate', placeholder: 'e.g. 2000', className: 'short-input' });
  const csvUnit = el('select', { id: 'csv-unit' }, el('option', { value: 'Pa', text: 'pressure, Pa' }), el('option', { value: 'other', text: 'another unit (levels relative to the largest value)' }));
  const csvError = el('span', { className: 'field-error', id: 'csv-rate-error', attrs: { role: 'alert' } });
  const csvBox = el(
    'details',
    { className: 'csv-options', id: 'csv-options' },
    el('summary', { text: 'Opening a one-column sensor CSV? Its sample rate and unit' }),
    el('label', { htmlFor: 'csv-rate', text: 'Sample rate of a one-column CSV, Hz' }),
    csvRate,
    csvError,
    el('label', { htmlFor: 'csv-unit', text: 'Values are' }),
    csvUnit,
  );

  const meterBar = el('div', { className: 'meter-bar' });
  const meter = el('div', { className: 'meter', id: 'input-meter', attrs: { role: 'meter', 'aria-label': 'input level', 'aria-valuemin': '-90', 'aria-valuemax': '0' } }, meterBar);
  const clipBadge = el('span', { className: 'clip-badge', id: 'clip-warning', text: 'CLIPPING: move away or lower the input', hidden: true });
  const meterRow = el('div', { className: 'meter-row' }, meter, clipBadge);

  const progress = el('progress', { id: 'file-progress', max: 1, value: 0, attrs: { 'aria-label': 'analysis of the file' } });
  const progressText = el('span', { id: 'file-progress-text' });
  const progressRow = el('div', { className: 'progress-row', hidden: true }, progress, progressText);

  const alertBox = el('div', { className: 'alert', id: 'listen-alert', hidden: true, attrs: { role: 'alert' } });
  const notes = el('ul', { className: 'notes', id: 'listen-notes', attrs: { 'aria-live': 'polite' } });

  const readoutHost = el('div', { className: 'readouts', id: 'readouts' });
  const markerHost = el('div', { className: 'markers', id: 'marker-bar' });
  const plotHost = el('div', { className: 'plots', id: 'plots' });
  const resultHost = el('section', { className: 'result', id: 'run-result', hidden: true, attrs: { 'aria-label': 'result of the run' } });

  root.append(el('h2', { className: 'visually-hidden', text: 'Listen' }), controls, labelRow, optionRow, csvBox, meterRow, progressRow, alertBox, notes, readoutHost, markerHost, plotHost, resultHost);

  const readouts = createReadouts(readoutHost);
  const marginView = createLiveMarginView(readoutHost);
  const markers = createMarkerBar(markerHost, (m) => controller.mark(m));
  markers.setEnabled(false);

  // --- what the user gives for a run ------------------------------------------------------
  function runMeta(): RunMeta {
    const s = site.input.value.trim();
    const e = equipment.input.value.trim();
    history.sites = remember(history.sites, s);
    history.equipment = remember(history.equipment, e);
    saveJson(LABELS_KEY, history);
    const g = ductBox.checked ? readDuctScreenGeometry() : undefined;
    return { ...(s ? { site: s } : {}), ...(e ? { equipment: e } : {}), ...(g ? { geometry: g } : {}), isSaved: saveBox.checked };
  }

  function fileOptions(): FileOptions | null {
    const text = csvRate.value.trim().replace(',', '.');
    csvError.textContent = '';
    const unit = csvUnit.value === 'other' ? 'other' : 'Pa';
    if (!text) return { csvUnit: unit };
    const rate = Number(text);
    if (!Number.isFinite(rate) || rate < MIN_SAMPLE_RATE_HZ || rate > MAX_SAMPLE_RATE_HZ) {
      csvError.textContent = `“Sample rate of a one-column CSV” must be a number of Hz from ${MIN_SAMPLE_RATE_HZ} to ${MAX_SAMPLE_RATE_HZ} (got “${csvRate.value}”).`;
      csvBox.open = true;
      return null;
    }
    return { csvRateHz: rate, csvUnit: unit };
  }

  // --- drawing ----------------------------------------------------------------------------
  function readoutInput(isFinal = false): Parameters<typeof readouts.update>[0] {
    const { levelDbfs, toneDbfs } = liveLevels(model);
    return { summary: model.summary, margin: model.margin, lastOnset: model.lastOnset, onsetCount: model.onsetCount, levelDbfs, toneDbfs, calibration: model.calibration, isAWeighted: model.isAWeighted, inputKind: model.inputKind, weighting: model.weighting, isFinal };
  }

  function frame(): void {
    rafId = requestAnimationFrame(frame);
    plots?.draw();
    spectrogram?.draw();
    readouts.update(readoutInput());
    marginView.update(model.margin);
    const peakDb = model.peakAbs > 0 ? 20 * Math.log10(model.peakAbs) : -90;
    const pct = Math.max(0, Math.min(100, ((peakDb + 90) / 90) * 100));
    meterBar.style.width = `${pct.toFixed(1)}%`;
    meter.setAttribute('aria-valuenow', peakDb.toFixed(0));
    clipBadge.hidden = performance.now() > model.clipUntilMs;
    clock.textContent = formatClock(model.timeS);
  }

  function ensurePlots(): void {
    if (plots) return;
    plots = createLivePlots(plotHost, model.buffer, () => model.bandHighHz);
    spectrogram = createSpectrogram(plotHost, model.buffer, () => model.inputKind !== 'microphone');
    spectrogram.redraw();
  }

  function startDrawing(): void {
    ensurePlots();
    if (!rafId) rafId = requestAnimationFrame(frame);
  }

  function stopDrawing(): void {
    if (rafId) cancelAnimationFrame(rafId);
    rafId = 0;
    // One last full draw so the final state stays on screen.
    model.buffer.version++;
    plots?.redraw();
    spectrogram?.redraw();
    clock.textContent = formatClock(model.timeS);
  }

  // --- controller events -------------------------------------------------------------------
  controller.on('state', (s: RunState) => {
    root.dataset.state = s;
    listenButton.textContent = s === 'listening' ? 'Stop' : s === 'starting' ? 'Starting…' : s === 'stopping' ? 'Stopping…' : 'Listen';
    listenButton.classList.toggle('stop', s === 'listening');
    listenButton.disabled = s === 'starting' || s === 'stopping' || s === 'file';
    listenButton.setAttribute('aria-pressed', String(s === 'listening'));
    fileInput.disabled = s !== 'idle';
    fileLabel.classList.toggle('disabled', s !== 'idle');
    // Options for a file still to be opened: not shown while a run (of any input) is under way.
    csvBox.hidden = s !== 'idle';
    markers.setEnabled(s === 'listening');
    if (s === 'listening' || s === 'file') startDrawing();
    if (s === 'idle') stopDrawing();
  });
  controller.on('reset', () => {
    marginView.reset();
    markers.clearPlaced();
    spectrogram?.redraw();
    resultHost.hidden = true;
    resultHost.replaceChildren();
  });
  controller.on('notes', (items) => notes.replaceChildren(...items.map((t) => el('li', { text: t }))));
  controller.on('alert', (message) => {
    alertBox.textContent = message ?? '';
    alertBox.hidden = !message;
  });
  controller.on('progress', (p) => {
    progressRow.hidden = !p;
    if (!p) return;
    if (p.fraction === null) progress.removeAttribute('value');
    else progress.value = p.fraction;
    progressText.textContent = p.text;
  });
  controller.on('marker', (m) => markers.addPlaced(m));
  controller.on('notice', (n) => app.notify(n.message, n.kind));
  controller.on('result', (r: RunResult) => {
    stopDrawing();
    readouts.showFinal(r.report, readoutInput(true));
    resultHost.replaceChildren(...renderRunResult(r));
    resultHost.hidden = false;
  });
  controller.on('saved', (id) => {
    resultHost.append(el('p', {}, el('a', { href: `#sessions/${encodeURIComponent(id)}`, className: 'big-link', text: 'Open this session' })));
  });

  // --- wiring -----------------------------------------------------------------------------
  listenButton.addEventListener('click', () => {
    if (controller.state === 'listening') void controller.stop();
    else void controller.startListening(runMeta());
  });
  fileInput.addEventListener('change', () => {
    const file = fileInput.files?.[0];
    fileInput.value = '';
    const options = fileOptions();
    if (file && options) void controller.openFile(file, runMeta(), options);
  });
  window.addEventListener('resize', () => {
    plots?.resize();
    spectrogram?.redraw();
  });
  app.onShow('listen', () => {
    renderDuctChoice();
    plots?.resize();
    plots?.redraw();
    spectrogram?.redraw();
  });
  ensurePlots();
  readouts.update(readoutInput());
};
