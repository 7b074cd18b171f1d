/**
 * Cautions: always reachable from the navigation, and shown once as a first-run notice.
 * Facts from REFERENCES.md §13 (EU Directive 2003/10/EC exposure action values; NIOSH 1998;
 * carbon monoxide and hot-surface practice); the app itself only listens.
 */
import type { AppContext, MountScreen } from '../app-context';
import { loadSettings, saveSettings } from '../settings';
import { el } from './dom';
import { LOWER_ACTION_DBA, UPPER_ACTION_DBA } from './live-readouts';

interface CautionSection {
  title: string;
  items: string[];
}

/** The cautions text, in order of urgency. */
export const CAUTIONS: CautionSection[] = [
  {
    title: 'This app only listens',
    items: [
      'It measures a hum; it does not make an appliance safe or unsafe. A boiler, furnace, water heater or burner that hums, roars or pulses is showing a fault: switch it off if it is safe to do so and call a licensed heating technician.',
      'Never modify a burner, flue, air inlet or control to make a hum start or stop. Follow local codes and the appliance maker’s instructions; gas, oil and flue work is for licensed persons.',
    ],
  },
  {
    title: 'Flue gas and carbon monoxide',
    items: [
      'Any flame or fuel-burning appliance can produce carbon monoxide, which has no colour and no smell. Work only with adequate ventilation, never in a closed unventilated space, and keep a working CO alarm nearby.',
      'Headache, dizziness, nausea or drowsiness near an appliance: stop, get into fresh air, and call for help.',
    ],
  },
  {
    title: 'Hot surfaces, burners and heated tubes',
    items: [
      'Burner parts, flues, heated gauzes and tubes stay hot long after the flame or glow stops. Use tongs or heat-resistant gloves, a stable non-combustible stand, and keep combustibles clear; have an extinguisher at hand.',
      'Glass tubes can crack under thermal shock; metal or borosilicate tubes are safer. Electrically heated gauzes draw high power: use a protected (RCD/GFCI) supply and rated wiring; mains work by qualified persons.',
      'Keep the phone away from flames and hot surfaces; hold it at arm’s length or place it on a cool stand.',
    ],
  },
  {
    title: 'Hearing',
    items: [
      `Thermoacoustic tones can be very loud. In the EU, employers must act from a daily exposure of ${LOWER_ACTION_DBA} dB(A) (lower action value) and provide and enforce hearing protection from ${UPPER_ACTION_DBA} dB(A) (upper action value), Directive 2003/10/EC. NIOSH recommends 85 dB(A) over 8 h, halving the allowed time for every 3 dB more (94 dB(A): 1 h).`,
      'A phone is not a sound level meter: even calibrated, its readings are indicative. Near a loud tone, wear hearing protection and keep your time close by short.',
    ],
  },
];

export const mountCautionsScreen: MountScreen = (root) => {
  root.append(
    el('h2', { text: 'Cautions' }),
    el('p', { className: 'lead', text: 'Read before listening near a heater, burner, flue or heated tube.' }),
    el('div', { className: 'cautions' }, ...CAUTIONS.flatMap((s) => [el('h3', { text: s.title }), el('ul', {}, ...s.items.map((t) => el('li', { text: t })))])),
  );
};

/** The first-run notice: the cautions in three lines for a technician; the full text one tap away. */
export const FIRST_RUN_LINES = [
  'This app only listens. A hum in a boiler, furnace or burner is a fault for a licensed technician: do not adjust burners, flues or gas settings to make or stop it.',
  'Flue gas can hold carbon monoxide: work ventilated, keep a CO alarm on you. Burner parts and tubes stay hot after the flame.',
  `Loud tones: above ${LOWER_ACTION_DBA} dB(A) wear hearing protection and keep your time close by short.`,
];

/**
 * Shows the cautions at first start as a short panel above the screens (not a modal: the app
 * stays usable, and keyboard and screen-reader users meet it first), with the full cautions one
 * tap away. Acknowledging it is remembered in the settings. Returns true when it was shown.
 */
export function showFirstRunNotice(app: AppContext, host: HTMLElement): boolean {
  const settings = loadSettings();
  if (settings.hasSeenCautions) return false;
  const panel = el(
    'section',
    { className: 'first-run', id: 'first-run', attrs: { 'aria-labelledby': 'first-run-title' } },
    el('h2', { id: 'first-run-title', text: 'Before you listen' }),
    el('ul', {}, ...FIRST_RUN_LINES.map((t) => el('li', { text: t }))),
  );
  const ok = el('button', { type: 'button', className: 'big-button primary', id: 'first-run-ok', text: 'I understand' });
  ok.addEventListener('click', () => {
    const s = loadSettings();
    s.hasSeenCautions = true;
    if (!saveSettings(s)) app.notify('Could not remember this notice (storage unavailable); it will show again.', 'warn');
    panel.remove();
  });
  panel.append(el('div', { className: 'controls' }, ok, el('a', { href: '#cautions', className: 'big-link', id: 'first-run-more', text: 'All cautions' })));
  host.prepend(panel);
  return true;
}
