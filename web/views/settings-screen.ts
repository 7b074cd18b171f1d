/**
 * Settings: band of interest, level display (A-weighting), theme, keeping audio, and the
 * calibration of this device's microphone from a sound calibrator (94 dB SPL at 1 kHz) or from a
 * reference sound level meter read at the same time.
 */
import type { MountScreen } from '../app-context';
import {
  CALIBRATOR_LEVEL_DB_SPL,
  calibrationOffsetDb,
  checkBand,
  loadSettings,
  saveSettings,
  type Settings,
  type Theme,
} from '../settings';
import { el } from './dom';
import { measureMicrophoneLevel } from '../run/calibration-run';
import { formatDb, formatHz } from '../format';

/** Seconds of sound measured for a calibration. */
const MEASURE_S = 4;

/** Applies the theme to the document (daylight = high-contrast light, dark = for dim rooms). */
export function applyTheme(theme: Theme): void {
  document.documentElement.dataset.theme = theme;
  const meta = document.querySelector('meta[name="theme-color"]');
  meta?.setAttribute('content', theme === 'daylight' ? '#ffffff' : '#0d1b22');
}

function field(labelText: string, input: HTMLElement, hint?: string): HTMLElement {
  const wrap = document.createElement('div');
  wrap.className = 'field';
  const label = document.createElement('label');
  label.textContent = labelText;
  label.htmlFor = input.id;
  wrap.append(label, input);
  if (hint) {
    const h = document.createElement('p');
    h.className = 'hint';
    h.textContent = hint;
    h.id = `${input.id}-hint`;
    input.setAttribute('aria-describedby', h.id);
    wrap.append(h);
  }
  return wrap;
}

function numberInput(id: string, value: number, step = 'any'): HTMLInputElement {
  const i = document.createElement('input');
  i.type = 'number';
  i.id = id;
  i.step = step;
  i.inputMode = 'decimal';
  i.value = String(value);
  return i;
}

function checkbox(id: string, checked: boolean, text: string): { wrap: HTMLElement; input: HTMLInputElement } {
  const wrap = document.createElement('div');
  wrap.className = 'field check';
  const input = document.createElement('input');
  input.type = 'checkbox';
  input.id = id;
  input.checked = checked;
  const label = document.createElement('label');
  label.htmlFor = id;
  label.textContent = text;
  wrap.append(input, label);
  return { wrap, input };
}

export const mountSettingsScreen: MountScreen = (root, app) => {
  let settings: Settings = loadSettings();
  applyTheme(settings.theme);

  const save = (message: string): void => {
    if (saveSettings(settings)) app.notify(message, 'info');
    else app.notify('Settings could not be stored (private browsing or storage full); they last until the page closes.', 'warn');
  };

  const h = document.createElement('h2');
  h.textContent = 'Settings';

  // Band of interest.
  const bandBox = document.createElement('fieldset');
  const bandLegend = document.createElement('legend');
  bandLegend.textContent = 'Band of interest';
  const low = numberInput('band-low', settings.bandLowHz, '1');
  const high = numberInput('band-high', settings.bandHighHz, '1');
  const bandError = document.createElement('p');
  bandError.className = 'field-error';
  bandError.setAttribute('role', 'alert');
  const onBand = (): void => {
    const lo = Number(low.value);
    const hi = Number(high.value);
    const problem = checkBand(lo, hi);
    bandError.textContent = problem ?? '';
    if (problem) return;
    settings.bandLowHz = lo;
    settings.bandHighHz = hi;
    save(`Band set to ${lo}–${hi} Hz (used from the next run).`);
  };
  low.addEventListener('change', onBand);
  high.addEventListener('change', onBand);
  bandBox.append(bandLegend, field('Lowest frequency, Hz', low), field('Highest frequency, Hz', high, 'Tones outside the band are ignored. A narrower band speeds up the analysis.'), bandError);

  // Display.
  const displayBox = document.createElement('fieldset');
  const displayLegend = document.createElement('legend');
  displayLegend.textContent = 'Display and storage';
  const aw = checkbox('a-weighting', settings.isAWeighted, 'Show the tone level A-weighted, dB(A) (IEC 61672-1), when calibrated');
  aw.input.addEventListener('change', () => {
    settings.isAWeighted = aw.input.checked;
    save(aw.input.checked ? 'Levels shown A-weighted.' : 'Levels shown unweighted.');
  });
  const keep = checkbox('keep-audio', settings.isKeepingAudio, 'Keep the raw audio with each session (for re-analysis and WAV export; uses more storage)');
  keep.input.addEventListener('change', () => {
    settings.isKeepingAudio = keep.input.checked;
    save(keep.input.checked ? 'Audio will be kept with sessions.' : 'Only the track and results will be kept.');
  });
  const floatAudio = checkbox('export-float-audio', settings.isExportingFloatAudio, 'Export bundles with 32-bit float audio (every sample exact, twice the size; 16-bit otherwise)');
  floatAudio.input.addEventListener('change', () => {
    settings.isExportingFloatAudio = floatAudio.input.checked;
    save(floatAudio.input.checked ? 'Bundles will carry 32-bit float audio.' : 'Bundles will carry 16-bit audio.');
  });
  const theme = document.createElement('select');
  theme.id = 'theme';
  for (const [value, text] of [['daylight', 'Daylight (high contrast, light)'], ['dark', 'Dark (dim rooms)']] as const) {
    const o = document.createElement('option');
    o.value = value;
    o.textContent = text;
    theme.append(o);
  }
  theme.value = settings.theme;
  theme.addEventListener('change', () => {
    settings.theme = theme.value === 'dark' ? 'dark' : 'daylight';
    applyTheme(settings.theme);
    save('Theme changed; plots take it from the next start of the app.');
  });
  // Time weighting of the level readout, IEC 61672-1 §5.8 (web/run/time-weighting.ts).
  const weighting = el('select', { id: 'level-weighting' }, el('option', { value: 'slow', text: 'Slow, S (1 s): steady hums, readable' }), el('option', { value: 'fast', text: 'Fast, F (0.125 s): follows quick changes' }));
  weighting.value = settings.levelWeighting;
  weighting.addEventListener('change', () => {
    settings.levelWeighting = weighting.value === 'fast' ? 'fast' : 'slow';
    save(`Level readout time weighting ${settings.levelWeighting === 'fast' ? 'F (0.125 s)' : 'S (1 s)'} from the next run.`);
  });
  displayBox.append(displayLegend, aw.wrap, keep.wrap, floatAudio.wrap, field('Level time weighting', weighting), field('Theme', theme));

  // Calibration.
  const calBox = document.createElement('fieldset');
  const calLegend = document.createElement('legend');
  calLegend.textContent = 'Calibration of this microphone';
  const calIntro = document.createElement('p');
  calIntro.className = 'hint';
  calIntro.textContent =
    'A phone is not a sound level meter; calibration makes its levels indicative. Either hold a sound calibrator (94 dB SPL at 1 kHz) on the microphone, or place the phone beside a reference meter in a steady sound and type the meter reading. Then press Measure.';
  const methodCal = document.createElement('input');
  methodCal.type = 'radio';
  methodCal.name = 'cal-method';
  methodCal.id = 'cal-method-calibrator';
  methodCal.checked = true;
  const methodMeter = document.createElement('input');
  methodMeter.type = 'radio';
  methodMeter.name = 'cal-method';
  methodMeter.id = 'cal-method-meter';
  const reference = numberInput('cal-reference', CALIBRATOR_LEVEL_DB_SPL, '0.1');
  const radio = (input: HTMLInputElement, text: string): HTMLElement => {
    const w = document.createElement('div');
    w.className = 'field check';
    const l = document.createElement('label');
    l.htmlFor = input.id;
    l.textContent = text;
    w.append(input, l);
    return w;
  };
  const syncMethod = (): void => {
    if (methodCal.checked) reference.value = String(CALIBRATOR_LEVEL_DB_SPL);
  };
  methodCal.addEventListener('change', syncMethod);
  methodMeter.addEventListener('change', syncMethod);
  const measure = document.createElement('button');
  measure.type = 'button';
  measure.className = 'big-button primary';
  measure.id = 'cal-measure';
  measure.textContent = `Measure ${MEASURE_S} s`;
  const calProgress = document.createElement('progress');
  calProgress.max = 1;
  calProgress.value = 0;
  calProgress.hidden = true;
  calProgress.setAttribute('aria-label', 'calibration measurement');
  const calResult = document.createElement('p');
  calResult.id = 'cal-result';
  calResult.setAttribute('role', 'status');
  const calList = document.createElement('ul');
  calList.id = 'cal-list';

  const renderCalibrations = (): void => {
    calList.replaceChildren();
    const entries = Object.entries(settings.calibrations);
    if (!entries.length) {
      const li = document.createElement('li');
      li.textContent = 'No microphone calibrated yet: levels read in dBFS.';
      calList.append(li);
    }
    for (const [key, c] of entries) {
      const li = document.createElement('li');
      const text = document.createElement('span');
      text.textContent = `${key.replace(/^(label|id):/, '')}: offset ${formatDb(c.offsetDb, 'dB')} (${c.source}, ${c.dateIso.slice(0, 10)}) `;
      const del = document.createElement('button');
      del.type = 'button';
      del.className = 'small-button';
      del.textContent = 'Remove';
      del.setAttribute('aria-label', `Remove the calibration of ${key.replace(/^(label|id):/, '')}`);
      del.addEventListener('click', () => {
        delete settings.calibrations[key];
        save('Calibration removed.');
        renderCalibrations();
      });
      li.append(text, del);
      calList.append(li);
    }
  };

  measure.addEventListener('click', async () => {
    const ref = Number(reference.value);
    if (!Number.isFinite(ref) || ref < 30 || ref > 140) {
      calResult.textContent = 'Enter the reference level in dB SPL (30–140).';
      return;
    }
    measure.disabled = true;
    calProgress.hidden = false;
    calProgress.value = 0;
    calResult.textContent = 'Measuring… keep the sound steady.';
    try {
      const m = await measureMicrophoneLevel(MEASURE_S, (f) => {
        calProgress.value = f;
      });
      const offset = calibrationOffsetDb(ref, m.levelDbfs);
      if (offset === null) throw new Error(`the measured level ${formatDb(m.levelDbfs, 'dBFS')} cannot be used`);
      const source = methodCal.checked ? `calibrator ${ref} dB SPL at 1 kHz` : `reference meter ${ref} dB`;
      settings = loadSettings();
      settings.calibrations[m.deviceKey] = { offsetDb: offset, source, dateIso: new Date().toISOString() };
      save('Calibration stored for this microphone.');
      let text = `Measured ${formatDb(m.levelDbfs, 'dBFS')} (spread ${formatDb(m.spreadDb, 'dB')}) on ${m.deviceLabel}: offset ${formatDb(offset, 'dB')}.`;
      if (m.spreadDb > 1.5) text += ' The level varied: repeat in a steadier sound for a better offset.';
      if (methodCal.checked && !(Math.abs(m.toneHz - 1000) < 50)) text += ` The loudest tone was ${formatHz(m.toneHz)}, not 1 kHz: is the calibrator on?`;
      calResult.textContent = text;
      renderCalibrations();
    } catch (err) {
      calResult.textContent = err instanceof Error ? err.message : String(err);
    } finally {
      measure.disabled = false;
      calProgress.hidden = true;
    }
  });
  calBox.append(
    calLegend,
    calIntro,
    radio(methodCal, `Sound calibrator (${CALIBRATOR_LEVEL_DB_SPL} dB SPL at 1 kHz)`),
    radio(methodMeter, 'Reference sound level meter'),
    field('Reference level, dB SPL', reference, 'For a calibrator, its rated level; for a meter, its reading (unweighted or Z-weighted) during the measurement.'),
    measure,
    calProgress,
    calResult,
    calList,
  );
  renderCalibrations();

  root.append(h, bandBox, displayBox, calBox);
  app.onShow('settings', () => {
    settings = loadSettings();
    renderCalibrations();
  });
};
