/**
 * Re-analysis panel of a stored session: band (or a mode of interest), markers moved, added or
 * removed after the fact, then the kept audio runs again through the analysis (in the storage worker). The new
 * figures show beside the stored ones; "Keep" makes them the session's report.
 */
import type { Marker, Report } from '../../dsp/types';
import type { FullSession } from '../storage/sessions';
import { checkReanalysis, keepReanalysis, octaveAround, reanalyseSession, type ReanalysisOptions } from '../run/reanalyse';
import { loadSettings } from '../settings';
import { formatFixed, formatHz, formatRate } from '../format';
import { renderReportParts } from './run-result';
import { el } from './dom';

const MARKER_KINDS: [string, string][] = [
  ['driving-on', 'driving on'],
  ['driving-off', 'driving off'],
  ['setting', 'setting changed'],
  ['note', 'note'],
];

interface MarkerRow {
  row: HTMLTableRowElement;
  time: HTMLInputElement;
  kind: HTMLSelectElement;
  label: HTMLInputElement;
  base: Marker;
}

function readNumber(text: string): number {
  const t = text.trim().replace(',', '.');
  return t === '' ? Number.NaN : Number(t);
}

/** The panel for `full`; `onKept` receives the report once the user keeps it. */
export function reanalysisPanel(full: FullSession, onKept: (report: Report, markers: Marker[]) => void): HTMLElement {
  const { record } = full;
  const sampleRateHz = record.meta.sampleRateHz;
  const box = el('section', { className: 'reanalyse', id: 'reanalyse' }, el('h3', { className: 'section-title', text: 'Re-analyse' }));
  if (!full.audio) {
    box.append(el('p', { className: 'hint', text: 'No audio was kept with this session, so it cannot be analysed again (Settings → keep the raw audio).' }));
    return box;
  }
  const audio = full.audio;
  const durationS = audio.length / sampleRateHz;
  const settings = loadSettings();
  const low = el('input', { type: 'text', inputMode: 'decimal', id: 'reanalyse-low', value: String(settings.bandLowHz), className: 'short-input' });
  const high = el('input', { type: 'text', inputMode: 'decimal', id: 'reanalyse-high', value: String(settings.bandHighHz), className: 'short-input' });
  const mode = el('input', { type: 'text', inputMode: 'decimal', id: 'reanalyse-mode', placeholder: 'e.g. 176', className: 'short-input' });
  mode.addEventListener('change', () => {
    const f = readNumber(mode.value);
    if (!(f > 0)) return;
    const [lo, hi] = octaveAround(f);
    low.value = formatFixed(lo, 1);
    high.value = formatFixed(hi, 1);
  });

  const tbody = el('tbody');
  const rows: MarkerRow[] = [];
  const addRow = (m: Marker): void => {
    const k = rows.length;
    const time = el('input', { type: 'text', inputMode: 'decimal', id: `reanalyse-marker-time-${k}`, value: formatFixed(m.timeS, 2), className: 'short-input', attrs: { 'aria-label': `time of marker ${k + 1}, s` } });
    const kind = el('select', { id: `reanalyse-marker-kind-${k}`, attrs: { 'aria-label': `kind of marker ${k + 1}` } }, ...MARKER_KINDS.map(([v, t]) => el('option', { value: v, text: t })));
    kind.value = MARKER_KINDS.some(([v]) => v === m.kind) ? m.kind : 'note';
    const label = el('input', { type: 'text', id: `reanalyse-marker-label-${k}`, value: m.label, maxLength: 120, attrs: { 'aria-label': `label of marker ${k + 1}` } });
    const remove = el('button', { type: 'button', className: 'small-button', text: 'Remove', attrs: { 'aria-label': `remove marker ${k + 1}` } });
    const row = el('tr', {}, el('td', {}, time), el('td', {}, kind), el('td', {}, label), el('td', {}, remove));
    const entry: MarkerRow = { row, time, kind, label, base: m };
    remove.addEventListener('click', () => {
      rows.splice(rows.indexOf(entry), 1);
      row.remove();
    });
    kind.addEventListener('change', () => {
      const word = MARKER_KINDS.find(([v]) => v === kind.value)?.[1];
      if (word && MARKER_KINDS.some(([, t]) => t === label.value)) label.value = word;
    });
    rows.push(entry);
    tbody.append(row);
  };
  for (const m of record.markers) addRow(m);
  const add = el('button', { type: 'button', className: 'small-button', id: 'reanalyse-add-marker', text: 'Add a marker' });
  add.addEventListener('click', () => addRow({ timeS: 0, kind: 'driving-off', label: 'driving off' }));

  const run = el('button', { type: 'button', className: 'big-button primary', id: 'reanalyse-run', text: 'Re-analyse' });
  const progress = el('progress', { id: 'reanalyse-progress', max: 1, value: 0, hidden: true });
  const message = el('p', { className: 'hint', id: 'reanalyse-message', attrs: { 'aria-live': 'polite' } });
  const result = el('div', { className: 'result', id: 'reanalyse-result' });

  const options = (): ReanalysisOptions => ({
    bandLowHz: readNumber(low.value),
    bandHighHz: readNumber(high.value),
    markers: rows.map((r) => {
      const { value, unit } = r.base;
      return { timeS: readNumber(r.time.value), kind: r.kind.value, label: r.label.value.trim() || r.kind.value, ...(value !== undefined ? { value } : {}), ...(unit ? { unit } : {}) };
    }),
  });

  run.addEventListener('click', async () => {
    const o = options();
    const problem = checkReanalysis(o, durationS);
    if (problem) {
      message.className = 'field-error';
      message.textContent = problem;
      return;
    }
    run.disabled = true;
    progress.hidden = false;
    progress.value = 0;
    message.className = 'hint';
    message.textContent = 'Analysing the kept audio…';
    result.replaceChildren();
    try {
      const report = await reanalyseSession(full.record.id, o, (f) => (progress.value = f));
      message.textContent = '';
      const keep = el('button', { type: 'button', className: 'small-button', id: 'reanalyse-keep', text: 'Keep this as the session’s result' });
      keep.addEventListener('click', async () => {
        keep.disabled = true;
        try {
          await keepReanalysis(record.id, report, o);
          onKept(report, o.markers);
          message.textContent = 'Kept: the session now shows this result.';
        } catch (err) {
          keep.disabled = false;
          message.className = 'field-error';
          message.textContent = `Not kept: ${err instanceof Error ? err.message : String(err)}`;
        }
      });
      result.replaceChildren(comparison(record.report, report), ...renderReportParts(report, 'Result of the re-analysis'), keep);
    } catch (err) {
      message.className = 'field-error';
      message.textContent = err instanceof Error ? err.message : String(err);
    } finally {
      run.disabled = false;
      progress.hidden = true;
    }
  });

  box.append(
    el('p', { className: 'hint', text: 'Runs the kept audio again through the analysis. Move a marker to where the driving really stopped, add one you missed, or give a mode of interest to analyse one octave around it.' }),
    el('div', { className: 'field' }, el('label', { htmlFor: mode.id, text: 'Mode of interest, Hz (optional)' }), mode),
    el('div', { className: 'field' }, el('label', { htmlFor: low.id, text: 'Band from, Hz' }), low, el('label', { htmlFor: high.id, text: 'to, Hz' }), high),
    el('div', { className: 'table-scroll' }, el('table', { className: 'segments' }, el('caption', { text: 'Markers for the re-analysis' }), el('thead', {}, el('tr', {}, ...['time, s', 'kind', 'label', ''].map((t) => el('th', { text: t, attrs: { scope: 'col' } })))), tbody)),
    add,
    el('div', { className: 'controls' }, run, progress),
    message,
    result,
  );
  return box;
}

/** Stored and new figures side by side. */
function comparison(before: Report | null, after: Report): HTMLElement {
  const row = (name: string, a: string, b: string): HTMLTableRowElement => el('tr', {}, el('th', { text: name, attrs: { scope: 'row' } }), el('td', { text: a }), el('td', { text: b }));
  const s0 = before?.summary;
  const s1 = after.summary;
  return el(
    'div',
    { className: 'table-scroll' },
    el(
      'table',
      { className: 'segments', id: 'reanalyse-compare' },
      el('caption', { text: 'Stored result and re-analysis' }),
      el('thead', {}, el('tr', {}, el('th', { text: '' }), el('th', { text: 'stored', attrs: { scope: 'col' } }), el('th', { text: 're-analysis', attrs: { scope: 'col' } }))),
      el(
        'tbody',
        {},
        row('Frequency', formatHz(s0?.frequencyHz), formatHz(s1.frequencyHz)),
        row('Growth rate', formatRate(s0?.growthRatePerS, s0?.growthRateCi95PerS, 'no growth fitted'), formatRate(s1.growthRatePerS, s1.growthRateCi95PerS, 'no growth fitted')),
        row('Decay rate', formatRate(s0?.decayRatePerS, s0?.decayRateCi95PerS, 'no decay fitted'), formatRate(s1.decayRatePerS, s1.decayRateCi95PerS, 'no decay fitted')),
      ),
    ),
  );
}
