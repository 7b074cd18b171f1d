/**
 * Editors of the session detail: control values of the markers (what the stability map plots),
 * and the duct geometry, gas temperature and calibration stored with the session. Every entry is
 * checked against the same ranges as an imported bundle, so what is saved can be exported and
 * imported again.
 */
import type { DuctGeometry, Marker } from '../../dsp/types';
import { formatClock, formatFixed } from '../format';
import { TEXT_LIMITS } from '../storage/bundle-schema';
import type { SessionRecord } from '../storage/db';
import { callStore } from '../storage/off-thread';
import { h } from './session-dom';

/** Reads a number field: undefined when empty, NaN when not a number or outside [min, max]. */
function readNumber(input: HTMLInputElement, min: number, max: number): number | undefined {
  const text = input.value.trim().replace(',', '.');
  if (text === '') return undefined;
  const x = Number(text);
  return Number.isFinite(x) && x >= min && x <= max ? x : Number.NaN;
}

function numberInput(id: string, value: number | undefined, step = 'any'): HTMLInputElement {
  const el = h('input', { attrs: { type: 'text', inputmode: 'decimal', id, autocomplete: 'off' } });
  el.value = value === undefined ? '' : String(value);
  el.dataset.step = step;
  return el;
}

/** A form editing the control value and unit of each marker. */
export function markerEditor(id: string, markers: Marker[], onSaved: (m: Marker[]) => void): HTMLElement {
  if (markers.length === 0) return h('p', { className: 'hint', text: 'No markers were set while recording.' });
  const msg = h('p', { className: 'hint', attrs: { 'aria-live': 'polite' } });
  const rows = markers.map((m, k) => ({ m, value: numberInput(`marker-value-${k}`, m.value), unit: h('input', { attrs: { type: 'text', id: `marker-unit-${k}`, maxlength: String(TEXT_LIMITS.markerUnit), autocomplete: 'off' } }) }));
  rows.forEach((r) => (r.unit.value = r.m.unit ?? ''));
  const form = h(
    'form',
    { className: 'marker-edit' },
    h('div', { className: 'table-scroll' }, h(
      'table',
      { className: 'segments' },
      h('caption', { text: 'Markers (control values feed the stability map)' }),
      h('thead', {}, h('tr', {}, ...['time (m:s)', 'label', 'control value', 'unit'].map((c) => h('th', { text: c, attrs: { scope: 'col' } })))),
      h(
        'tbody',
        {},
        ...rows.map((r, k) =>
          h(
            'tr',
            {},
            h('td', { text: formatClock(r.m.timeS) }),
            h('td', { text: r.m.label }),
            h('td', {}, h('label', { className: 'visually-hidden', text: `Control value of marker ${k + 1}`, attrs: { for: r.value.id } }), r.value),
            h('td', {}, h('label', { className: 'visually-hidden', text: `Unit of marker ${k + 1}`, attrs: { for: r.unit.id } }), r.unit),
          ),
        ),
      ),
    )),
    h('button', { className: 'small-button', text: 'Save control values', attrs: { type: 'submit' } }),
    msg,
  );
  form.addEventListener('submit', async (e) => {
    e.preventDefault();
    const next: Marker[] = [];
    for (const [k, r] of rows.entries()) {
      const value = readNumber(r.value, -Number.MAX_VALUE, Number.MAX_VALUE);
      const unit = r.unit.value.trim();
      if (Number.isNaN(value)) {
        msg.className = 'field-error';
        msg.textContent = `Marker ${k + 1}: the control value must be a number, or empty.`;
        return;
      }
      const { value: _v, unit: _u, ...rest } = r.m;
      void _v;
      void _u;
      next.push({ ...rest, ...(value !== undefined ? { value } : {}), ...(unit ? { unit } : {}) });
    }
    try {
      await callStore('updateMarkers', id, next);
      onSaved(next);
      msg.className = 'hint';
      msg.textContent = 'Control values saved.';
    } catch (err) {
      msg.className = 'field-error';
      msg.textContent = `Not saved: ${err instanceof Error ? err.message : String(err)}`;
    }
  });
  return form;
}

/** Words for a session's duct geometry: the figures, or "not given". */
export function geometryWords(geometry: DuctGeometry | undefined): string {
  if (!geometry) return 'Duct geometry: not given';
  return `Duct: ${formatFixed(geometry.lengthM, 3)} m long, ${formatFixed(geometry.diameterM * 1000, 1)} mm bore, ${geometry.ends.replace('-', '–')}, gas ${formatFixed(geometry.gasTemperatureC, 0)} °C`;
}

/**
 * A form editing the duct geometry, gas temperature and calibration offset stored with the
 * session. A session without geometry says so ("not given") and takes one only when all three
 * figures are entered; no default is ever filled in.
 */
export function conditionsEditor(id: string, geometry: DuctGeometry | undefined, calibrationOffsetDb: number | undefined, onSaved: (record: SessionRecord) => void): HTMLElement {
  const msg = h('p', { className: 'hint', attrs: { 'aria-live': 'polite' } });
  const length = numberInput('edit-length', geometry?.lengthM);
  const diameter = numberInput('edit-diameter', geometry ? geometry.diameterM * 1000 : undefined);
  const gas = numberInput('edit-gas', geometry?.gasTemperatureC);
  const ends = h('select', { attrs: { id: 'edit-ends' } }, ...(['open-open', 'open-closed', 'closed-closed'] as const).map((v) => h('option', { text: v.replace('-', '–'), attrs: { value: v } })));
  ends.value = geometry?.ends ?? 'open-open';
  const cal = numberInput('edit-calibration', calibrationOffsetDb);
  const status = h('p', { className: 'hint', text: geometryWords(geometry), attrs: { id: 'session-geometry' } });
  const field = (label: string, input: HTMLInputElement | HTMLSelectElement): HTMLElement => h('div', { className: 'field' }, h('label', { text: label, attrs: { for: input.id } }), input);
  const form = h(
    'form',
    { className: 'conditions-edit' },
    h(
      'fieldset',
      {},
      h('legend', { text: 'Duct, gas temperature and calibration' }),
      status,
      field('Duct length (m)', length),
      field('Inner diameter (mm)', diameter),
      field('Ends', ends),
      field('Gas temperature (°C)', gas),
      field('Calibration offset added to dBFS (dB)', cal),
      h('button', { className: 'small-button', text: 'Save', attrs: { type: 'submit' } }),
      msg,
    ),
  );
  form.addEventListener('submit', async (e) => {
    e.preventDefault();
    const fail = (text: string): void => {
      msg.className = 'field-error';
      msg.textContent = text;
    };
    const offset = readNumber(cal, -300, 300);
    if (Number.isNaN(offset)) return fail('The calibration offset must be a number of dB between −300 and 300, or empty.');
    const l = readNumber(length, 0.001, 1000);
    const d = readNumber(diameter, 0.1, 100_000);
    const t = readNumber(gas, -273.15, 3000);
    let nextGeometry: DuctGeometry | undefined = geometry;
    const isAnyGiven = l !== undefined || d !== undefined || t !== undefined;
    if (isAnyGiven || geometry) {
      if (l === undefined || Number.isNaN(l)) return fail('Duct length must be a number of metres between 0.001 and 1000.');
      if (d === undefined || Number.isNaN(d)) return fail('Inner diameter must be a number of millimetres between 0.1 and 100000.');
      if (t === undefined || Number.isNaN(t)) return fail('Gas temperature must be a number of °C between −273.15 and 3000.');
      const endsValue = ends.value === 'open-closed' || ends.value === 'closed-closed' ? ends.value : 'open-open';
      nextGeometry = { openEnd: 'unflanged', ...geometry, lengthM: l, diameterM: d / 1000, gasTemperatureC: t, ends: endsValue };
    }
    try {
      onSaved(await callStore('updateMeta', id, { ...(nextGeometry ? { geometry: nextGeometry } : {}), calibrationOffsetDb: offset }));
      status.textContent = geometryWords(nextGeometry);
      msg.className = 'hint';
      msg.textContent = 'Saved. Reopen the session to see levels with the new calibration.';
    } catch (err) {
      fail(`Not saved: ${err instanceof Error ? err.message : String(err)}`);
    }
  });
  return form;
}
