/**
 * Marker buttons of the Listen screen: one tap each for "driving on", "driving off / heater
 * removed" and "setting changed" (with an optional control value and unit), and the list of
 * markers placed in this run with their times.
 */
import type { Marker } from '../../dsp/types';
import { formatClock, formatFixed } from '../format';
import { el } from './dom';

/** Decimals as typed ("60" → 0, "12.5" → 1), so the label repeats what the user entered. */
function decimalsOf(text: string): number {
  const m = text.trim().replace(',', '.').match(/\.(\d+)$/);
  return m ? Math.min(6, m[1]?.length ?? 0) : 0;
}

export type NewMarker = Omit<Marker, 'timeS'>;

export interface MarkerBar {
  setEnabled(isEnabled: boolean): void;
  /** Shows a marker the analysis has placed (with its time). */
  addPlaced(marker: Marker): void;
  clearPlaced(): void;
}

/**
 * Units offered for the control value of a "setting changed" marker (firing rate, heater power,
 * gas pressure, temperature, fuel and air flow, flue oxygen, air ratio); any other unit may be typed.
 */
export const CONTROL_UNITS = ['%', 'W', 'kW', 'mbar', 'Pa', '°C', 'kg/h', 'm³/h', 'O₂ %', 'λ', 'Hz', 'V', 'A'] as const;

/** Longest unit text accepted, characters. */
const MAX_UNIT_CHARS = 30;

/** Checks the control value field: null when empty, a number, or an error message. */
export function parseControlValue(text: string): { value: number | null } | { error: string } {
  const t = text.trim().replace(',', '.');
  if (t === '') return { value: null };
  const v = Number(t);
  if (!Number.isFinite(v)) return { error: `“${text}” is not a number.` };
  return { value: v };
}

/** Builds the bar in `host`; `onMark` receives each tap. */
export function createMarkerBar(host: HTMLElement, onMark: (m: NewMarker) => void): MarkerBar {
  const heading = document.createElement('h2');
  heading.className = 'section-title';
  heading.textContent = 'Markers';
  const row = document.createElement('div');
  row.className = 'marker-buttons';
  const button = (id: string, text: string, kind: string, label: string): HTMLButtonElement => {
    const b = document.createElement('button');
    b.type = 'button';
    b.id = id;
    b.className = 'marker-button';
    b.textContent = text;
    b.addEventListener('click', () => onMark({ kind, label }));
    row.append(b);
    return b;
  };
  const on = button('mark-driving-on', 'Driving on', 'driving-on', 'driving on');
  const off = button('mark-driving-off', 'Driving off / heater removed', 'driving-off', 'driving off');

  const setting = document.createElement('div');
  setting.className = 'marker-setting';
  const valueInput = document.createElement('input');
  valueInput.type = 'text';
  valueInput.inputMode = 'decimal';
  valueInput.id = 'mark-value';
  valueInput.placeholder = 'value';
  valueInput.setAttribute('aria-label', 'control value (optional)');
  // A unit from the list or typed freely.
  const unitList = el('datalist', { id: 'mark-unit-list' }, ...CONTROL_UNITS.map((u) => el('option', { value: u })));
  const unitSelect = el('input', { type: 'text', id: 'mark-unit', value: '%', maxLength: MAX_UNIT_CHARS, autocomplete: 'off', className: 'unit-input', attrs: { list: unitList.id, 'aria-label': 'unit of the control value (pick or type)' } });
  const settingButton = document.createElement('button');
  settingButton.type = 'button';
  settingButton.id = 'mark-setting';
  settingButton.className = 'marker-button';
  settingButton.textContent = 'Setting changed';
  const error = document.createElement('span');
  error.className = 'field-error';
  error.setAttribute('role', 'alert');
  settingButton.addEventListener('click', () => {
    const parsed = parseControlValue(valueInput.value);
    if ('error' in parsed) {
      error.textContent = parsed.error;
      return;
    }
    error.textContent = '';
    const unit = unitSelect.value.trim();
    if (parsed.value === null) onMark({ kind: 'setting', label: 'setting changed' });
    else onMark({ kind: 'setting', label: `setting ${formatFixed(parsed.value, decimalsOf(valueInput.value))}${unit ? ` ${unit}` : ''}`, value: parsed.value, ...(unit ? { unit } : {}) });
  });
  setting.append(valueInput, unitSelect, unitList, settingButton, error);

  const list = document.createElement('ol');
  list.className = 'marker-list';
  list.id = 'marker-list';
  list.setAttribute('aria-label', 'markers placed');

  host.append(heading, row, setting, list);
  const controls: (HTMLButtonElement | HTMLInputElement)[] = [on, off, settingButton, valueInput, unitSelect];

  return {
    setEnabled(isEnabled) {
      for (const c of controls) c.disabled = !isEnabled;
    },
    addPlaced(marker) {
      const li = document.createElement('li');
      li.dataset.kind = marker.kind;
      li.dataset.timeS = String(marker.timeS);
      li.textContent = `${formatClock(marker.timeS)} ${marker.label}`;
      list.append(li);
    },
    clearPlaced() {
      list.replaceChildren();
    },
  };
}
