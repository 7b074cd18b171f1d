/**
 * Rig and duct screen: the geometry form (stored for the next session under
 * 'humgauge.ductGeometry'), the predicted plane-wave modes, a measured tone → matching mode and
 * inferred mean gas temperature, a sketch of the duct with the mode shape and the heater, and the
 * Rayleigh reading of the heater for the chosen mode. All numbers come from dsp/duct.ts and
 * dsp/duct-match.ts; every field is checked against the model's physical ranges (dsp/gas.ts).
 * A measured frequency can arrive in the URL: #duct/171.2 (Hz).
 */
import './duct-screen.css';
import type { MountScreen } from '../app-context';
import {
  DIAMETER_RANGE_M,
  ductModelFromGeometry,
  GAS_TEMPERATURE_RANGE_C,
  LENGTH_RANGE_M,
  modeShape,
  predictModes,
  rayleighReading,
  speedOfSoundMPerS,
  type DuctModel,
  type MeanFlow,
  type ModePrediction,
} from '../../dsp/duct';
import { matchMeasuredFrequency, MEASURED_FREQUENCY_RANGE_HZ, type MeasuredMatch } from '../../dsp/duct-match';
import type { DuctGeometry } from '../../dsp/types';
import { formatFixed, formatHz, formatQuantity } from '../format';
import { GEOMETRY_KEY } from '../run/geometry';
import { callStore } from '../storage/off-thread';
import { el, loadJson, saveJson } from './dom';

/** localStorage key of this screen's other choices (closed end, flow, uncertainties, measured tone). */
const EXTRAS_KEY = 'humgauge.ductScreen';

const MODE_COUNT = 6;
const SVG_NS = 'http://www.w3.org/2000/svg';

interface Extras {
  closedEnd: 'upstream' | 'downstream';
  flow: MeanFlow;
  hasHeater: boolean;
  measuredHz: string;
  frequencyStdHz: string;
  lengthStdMm: string;
}

const DEFAULT_GEOMETRY: DuctGeometry = { lengthM: 1.2, diameterM: 0.048, ends: 'open-open', openEnd: 'unflanged', gasTemperatureC: 20 };
const DEFAULT_EXTRAS: Extras = { closedEnd: 'upstream', flow: 'upward', hasHeater: false, measuredHz: '', frequencyStdHz: '0.5', lengthStdMm: '5' };


function svg<K extends keyof SVGElementTagNameMap>(tag: K, attrs: Record<string, string | number>): SVGElementTagNameMap[K] {
  const e = document.createElementNS(SVG_NS, tag);
  for (const [k, v] of Object.entries(attrs)) e.setAttribute(k, String(v));
  return e;
}

/** A text input for a decimal number (comma accepted) with its label, hint and error line. */
function numberField(id: string, label: string, hint: string): { wrap: HTMLElement; input: HTMLInputElement; error: HTMLElement } {
  const input = el('input', { id, type: 'text', inputMode: 'decimal', autocomplete: 'off', spellcheck: false });
  const error = el('p', { className: 'field-error', id: `${id}-error` });
  error.setAttribute('role', 'alert');
  input.setAttribute('aria-describedby', `${id}-hint ${id}-error`);
  const wrap = el('div', { className: 'field' }, el('label', { htmlFor: id, textContent: label }), input, el('p', { className: 'hint', id: `${id}-hint`, textContent: hint }), error);
  return { wrap, input, error };
}

function selectField(id: string, label: string, options: [string, string][]): { wrap: HTMLElement; select: HTMLSelectElement } {
  const select = el('select', { id });
  for (const [value, text] of options) select.append(el('option', { value, textContent: text }));
  return { wrap: el('div', { className: 'field' }, el('label', { htmlFor: id, textContent: label }), select), select };
}

/** Parses a decimal number typed by a person ("1,2" or "1.2"); null when it is not one. */
export function parseDecimal(text: string): number | null {
  const t = text.trim().replace(',', '.');
  if (t === '' || !/^[+-]?(\d+\.?\d*|\.\d+)([eE][+-]?\d+)?$/.test(t)) return null;
  const v = Number(t);
  return Number.isFinite(v) ? v : null;
}

export const mountDuctScreen: MountScreen = (root, app) => {
  const geometry = loadJson<DuctGeometry>(GEOMETRY_KEY, DEFAULT_GEOMETRY);
  const extras = loadJson<Extras>(EXTRAS_KEY, { ...DEFAULT_EXTRAS, hasHeater: geometry.heaterPositionM !== undefined });

  root.classList.add('duct-screen');
  root.append(el('h2', { textContent: 'Duct and rig' }));
  root.append(el('p', { className: 'hint', textContent: 'Describe the duct to see which modes it can hum at, which mode a measured tone is, and the mean gas temperature that tone implies. The geometry is kept for your next sessions.' }));

  // ---- Geometry form ----
  const form = el('form', { className: 'duct-form', noValidate: true });
  form.addEventListener('submit', (e) => e.preventDefault());
  const length = numberField('duct-length', 'Length (m)', 'Inside length from the lower (upstream) end to the upper end.');
  const diameter = numberField('duct-diameter', 'Inner diameter (mm)', 'Sets the end corrections and the cross-mode limit.');
  const ends = selectField('duct-ends', 'Ends', [
    ['open-open', 'open – open'],
    ['open-closed', 'open – closed (quarter wave)'],
    ['closed-closed', 'closed – closed'],
  ]);
  const closedEnd = selectField('duct-closed-end', 'Closed end', [
    ['upstream', 'lower (upstream) end'],
    ['downstream', 'upper (downstream) end'],
  ]);
  const openEnd = selectField('duct-open-end', 'Open ends', [
    ['unflanged', 'plain pipe end (unflanged, 0.6133 a)'],
    ['flanged', 'end in a wall or flange (0.8216 a)'],
    ['none', 'no end correction'],
  ]);
  const temp = numberField('duct-temp', 'Gas temperature (°C)', 'Mean gas temperature; below the heater when there is one.');
  const heaterBox = el('input', { id: 'duct-has-heater', type: 'checkbox' });
  const heaterToggle = el('div', { className: 'field check' }, heaterBox, el('label', { htmlFor: 'duct-has-heater', textContent: 'A heater or burner sits in the duct' }));
  const heaterPos = numberField('duct-heater', 'Heater position (m from the lower end)', 'Where the compact heat source sits.');
  const hotTemp = numberField('duct-hot-temp', 'Gas temperature above the heater (°C)', 'The hot zone downstream of the heater.');
  const flow = selectField('duct-flow', 'Mean flow through the heater', [
    ['upward', 'upward (from the lower end)'],
    ['downward', 'downward'],
    ['none', 'none'],
  ]);
  const heaterGroup = el('div', { className: 'duct-heater-group' }, heaterPos.wrap, hotTemp.wrap, flow.wrap);
  form.append(
    el('fieldset', {}, el('legend', { textContent: 'Geometry and gas' }), length.wrap, diameter.wrap, ends.wrap, closedEnd.wrap, openEnd.wrap, temp.wrap),
    el('fieldset', {}, el('legend', { textContent: 'Heater' }), heaterToggle, heaterGroup),
  );
  root.append(form);

  // ---- Results ----
  const problems = el('div', { className: 'duct-problems' });
  problems.setAttribute('role', 'status');
  const facts = el('p', { className: 'duct-facts' });
  const table = el('table', { className: 'segments duct-modes' });
  const warningsBox = el('div', { className: 'duct-warnings' });
  root.append(el('h3', { className: 'section-title', textContent: 'Predicted modes' }), problems, facts, table, warningsBox);

  // ---- Measured tone ----
  const measured = numberField('duct-measured', 'Measured tone (Hz)', 'Typed in, or taken from a session below.');
  const fromSession = selectField('duct-from-session', 'Tone of a recorded session', [['', 'loading sessions…']]);
  const fromSessionHint = el('p', { className: 'hint', id: 'duct-from-session-hint' });
  fromSession.wrap.append(fromSessionHint);
  const fStd = numberField('duct-measured-std', 'Frequency uncertainty (Hz, one standard deviation)', '');
  const lStd = numberField('duct-length-std', 'Length uncertainty (mm, one standard deviation)', '');
  const matchOut = el('div', { className: 'duct-match' });
  matchOut.setAttribute('aria-live', 'polite');
  const measuredForm = el('form', { className: 'duct-form', noValidate: true }, el('fieldset', {}, el('legend', { textContent: 'Which mode is humming?' }), measured.wrap, fromSession.wrap, fStd.wrap, lStd.wrap));
  measuredForm.addEventListener('submit', (e) => e.preventDefault());
  root.append(el('h3', { className: 'section-title', textContent: 'Measured tone' }), measuredForm, matchOut);

  // ---- Sketch ----
  const modePick = selectField('duct-shape-mode', 'Mode shown', []);
  const sketchHost = el('figure', { className: 'duct-sketch' });
  const rayleighOut = el('p', { className: 'duct-rayleigh' });
  root.append(el('h3', { className: 'section-title', textContent: 'Mode shape and heater' }), modePick.wrap, sketchHost, rayleighOut);

  // Fill the form from what was stored.
  length.input.value = String(geometry.lengthM);
  diameter.input.value = formatPlain(geometry.diameterM * 1000);
  ends.select.value = geometry.ends;
  closedEnd.select.value = extras.closedEnd;
  openEnd.select.value = geometry.openEnd;
  temp.input.value = String(geometry.gasTemperatureC);
  heaterBox.checked = extras.hasHeater;
  heaterPos.input.value = geometry.heaterPositionM !== undefined ? String(geometry.heaterPositionM) : formatPlain(geometry.lengthM / 4);
  hotTemp.input.value = geometry.hotTemperatureC !== undefined ? String(geometry.hotTemperatureC) : '200';
  flow.select.value = extras.flow;
  measured.input.value = extras.measuredHz;
  fStd.input.value = extras.frequencyStdHz;
  lStd.input.value = extras.lengthStdMm;

  let current: { model: DuctModel; prediction: ModePrediction; geometry: DuctGeometry } | null = null;

  /** Reads one number field; shows its own message and returns null when it is not usable. */
  const read = (f: { input: HTMLInputElement; error: HTMLElement }, what: string, check: (v: number) => string | null): number | null => {
    const v = parseDecimal(f.input.value);
    let msg: string | null = null;
    if (f.input.value.trim() === '') msg = `Enter the ${what}.`;
    else if (v === null) msg = `The ${what} must be a number.`;
    else msg = check(v);
    f.error.textContent = msg ?? '';
    f.input.setAttribute('aria-invalid', msg ? 'true' : 'false');
    return msg ? null : v;
  };
  const positive = (unit: string) => (v: number): string | null => (v > 0 ? null : `Must be more than 0 ${unit}.`);
  /** The model's physical ranges (dsp/gas.ts), in the unit of the field (scale × SI). */
  const within = (min: number, max: number, unit: string, why: string) => (v: number): string | null =>
    v >= min && v <= max ? null : `Must lie from ${formatPlain(min)} to ${formatPlain(max)} ${unit} (${why}).`;
  const lengthRange = within(LENGTH_RANGE_M.min, LENGTH_RANGE_M.max, 'm', 'a duct from a millimetre to the tallest chimneys');
  const diameterRange = within(DIAMETER_RANGE_M.min * 1000, DIAMETER_RANGE_M.max * 1000, 'mm', 'a capillary to the widest stacks');
  const gasRange = (v: number): string | null =>
    v > -273.15
      ? within(GAS_TEMPERATURE_RANGE_C.min, GAS_TEMPERATURE_RANGE_C.max, '°C', 'a gas: air condenses below, flames do not reach above')(v)
      : 'Must be above absolute zero (−273.15 °C).';

  /** Recomputes the modes; `byUser` (an edit of the form) also keeps the geometry for the next sessions. */
  function update(byUser = false): void {
    closedEnd.wrap.hidden = ends.select.value !== 'open-closed';
    heaterGroup.hidden = !heaterBox.checked;
    const lengthM = read(length, 'length', lengthRange);
    const diameterMm = read(diameter, 'inner diameter', diameterRange);
    const gasC = read(temp, 'gas temperature', gasRange);
    let heaterM: number | null = null;
    let hotC: number | null = null;
    let heaterOk = true;
    if (heaterBox.checked) {
      heaterM = read(heaterPos, 'heater position', (v) =>
        lengthM !== null && !(v > 0 && v < lengthM) ? `Must lie inside the duct, between 0 and ${formatPlain(lengthM)} m.` : v > 0 ? null : 'Must be more than 0 m.',
      );
      hotC = read(hotTemp, 'temperature above the heater', gasRange);
      heaterOk = heaterM !== null && hotC !== null;
    } else {
      heaterPos.error.textContent = '';
      hotTemp.error.textContent = '';
    }
    problems.textContent = '';
    current = null;
    if (lengthM === null || diameterMm === null || gasC === null || !heaterOk) {
      showUnavailable('Correct the highlighted fields to see the modes.');
      return;
    }
    const g: DuctGeometry = {
      lengthM,
      diameterM: diameterMm / 1000,
      ends: ends.select.value as DuctGeometry['ends'],
      openEnd: openEnd.select.value as DuctGeometry['openEnd'],
      gasTemperatureC: gasC,
    };
    if (heaterBox.checked && heaterM !== null && hotC !== null) {
      g.heaterPositionM = heaterM;
      g.hotTemperatureC = hotC;
    }
    try {
      const model: DuctModel = { ...ductModelFromGeometry(g), closedEnd: closedEnd.select.value as Extras['closedEnd'] };
      const prediction = predictModes(model, MODE_COUNT);
      current = { model, prediction, geometry: g };
    } catch (err) {
      showUnavailable(`The modes cannot be computed: ${err instanceof Error ? err.message : String(err)}.`);
      return;
    }
    // Only what the user typed is kept: the form's starting values are a suggestion, and a geometry
    // never set stays "not given" for the sessions (the listen screen offers only a stored one).
    if (byUser) saveJson(GEOMETRY_KEY, g);
    if (byUser) saveJson(EXTRAS_KEY, {
      closedEnd: closedEnd.select.value as Extras['closedEnd'],
      flow: flow.select.value as MeanFlow,
      hasHeater: heaterBox.checked,
      measuredHz: measured.input.value,
      frequencyStdHz: fStd.input.value,
      lengthStdMm: lStd.input.value,
    } satisfies Extras);
    renderModes();
    renderMatch();
    renderSketch();
  }

  function showUnavailable(message: string): void {
    problems.textContent = message;
    facts.textContent = '';
    table.replaceChildren();
    warningsBox.replaceChildren();
    matchOut.textContent = 'No match until the geometry is complete.';
    sketchHost.replaceChildren();
    modePick.wrap.hidden = true;
    rayleighOut.textContent = '';
  }

  function renderModes(): void {
    if (!current) return;
    const { model, prediction } = current;
    const speeds = model.zones.map((z) => speedOfSoundMPerS(z.temperatureC, model.gas));
    const cText =
      speeds.length === 1
        ? formatQuantity(speeds[0], 'm/s', null, { decimals: 1 })
        : `${formatQuantity(Math.min(...speeds), 'm/s', null, { decimals: 1 })} below the heater, ${formatQuantity(Math.max(...speeds), 'm/s', null, { decimals: 1 })} above`;
    facts.textContent = `Speed of sound ${cText}; effective length ${formatQuantity(prediction.effectiveLengthM, 'm', null, { decimals: 3 })}; plane waves only below ${formatHz(prediction.cutOnHz)} (first cross mode).`;
    const hasHeater = current.geometry.heaterPositionM !== undefined;
    const head = el('tr', {}, el('th', { scope: 'col', textContent: 'Mode' }), el('th', { scope: 'col', textContent: 'Frequency' }));
    if (hasHeater) head.append(el('th', { scope: 'col', textContent: 'Heater' }));
    const body = el('tbody');
    const heaterX = current.geometry.heaterPositionM;
    for (const m of prediction.modes) {
      const row = el('tr', {}, el('td', { textContent: String(m.n) }), el('td', { className: 'num', textContent: formatQuantity(m.frequencyHz, 'Hz', null, { decimals: 2 }) + (m.isAboveCutOn ? ' (above cut-on)' : '') }));
      if (hasHeater && heaterX !== undefined) {
        const r = rayleighReading(model, m.frequencyHz, heaterX, flow.select.value as MeanFlow);
        row.append(el('td', { textContent: readingText(r.reading) }));
      }
      body.append(row);
    }
    table.replaceChildren(
      el('caption', { textContent: `${prediction.method === 'closed-form' ? 'Uniform gas' : 'Cold and hot zones, by transfer matrices'}` }),
      el('thead', {}, head),
      body,
    );
    warningsBox.replaceChildren(...prediction.warnings.map((w) => el('p', { className: 'duct-warning', textContent: `Caution: ${w}.` })));
    modePick.wrap.hidden = false;
    const keep = modePick.select.value;
    modePick.select.replaceChildren(...prediction.modes.map((m) => el('option', { value: String(m.n), textContent: `${m.n}: ${formatHz(m.frequencyHz)}` })));
    modePick.select.value = prediction.modes.some((m) => String(m.n) === keep) ? keep : '1';
  }

  function renderMatch(): void {
    if (!current) return;
    const raw = measured.input.value.trim();
    measured.error.textContent = '';
    fStd.error.textContent = '';
    lStd.error.textContent = '';
    if (raw === '') {
      matchOut.textContent = 'Enter a measured tone to find its mode and the gas temperature it implies.';
      return;
    }
    const fHz = read(measured, 'measured tone', (v) => positive('Hz')(v) ?? within(0, MEASURED_FREQUENCY_RANGE_HZ.max, 'Hz', 'the audio band')(v));
    const sf = read(fStd, 'frequency uncertainty', (v) => within(0, fHz ?? Number.POSITIVE_INFINITY, 'Hz', 'at most the tone itself')(v));
    const sl = read(lStd, 'length uncertainty', (v) => within(0, current ? current.geometry.lengthM * 1000 : Number.POSITIVE_INFINITY, 'mm', 'at most the length')(v));
    if (fHz === null || sf === null || sl === null) {
      matchOut.textContent = 'Correct the measured-tone fields to see the match.';
      return;
    }
    try {
      const m = matchMeasuredFrequency(current.model, fHz, { frequencyStdHz: sf, lengthStdM: sl / 1000 }, Math.max(MODE_COUNT, 12));
      matchOut.replaceChildren(...matchView(m, fHz));
      if (m.best) modePick.select.value = String(Math.min(m.best.n, MODE_COUNT));
    } catch (err) {
      matchOut.textContent = `No match: ${err instanceof Error ? err.message : String(err)}.`;
    }
  }

  function renderSketch(): void {
    if (!current) return;
    const { model, prediction, geometry: g } = current;
    const n = Number(modePick.select.value) || 1;
    const mode = prediction.modes.find((m) => m.n === n) ?? prediction.modes[0];
    const shape = modeShape(model, mode.frequencyHz, 121);
    const W = 640;
    const H = 300;
    const x0 = 24;
    const x1 = W - 24;
    const yMid = 140;
    const amp = 80;
    const sx = (xM: number): number => x0 + ((x1 - x0) * xM) / g.lengthM;
    const root2 = svg('svg', { viewBox: `0 0 ${W} ${H}`, role: 'img', class: 'duct-svg' });
    const title = svg('title', {});
    title.textContent = `Duct sketch: mode ${mode.n} at ${formatHz(mode.frequencyHz)}, pressure and velocity along the duct${g.heaterPositionM !== undefined ? `, heater at ${formatQuantity(g.heaterPositionM, 'm', null, { decimals: 2 })}` : ''}.`;
    root2.append(title);
    if (g.heaterPositionM !== undefined) root2.append(svg('rect', { x: sx(g.heaterPositionM), y: yMid - amp - 12, width: sx(g.lengthM) - sx(g.heaterPositionM), height: 2 * amp + 24, class: 'duct-hot' }));
    // Tube walls; closed ends get a thick cap.
    root2.append(svg('line', { x1: x0, y1: yMid - amp - 12, x2: x1, y2: yMid - amp - 12, class: 'duct-wall' }));
    root2.append(svg('line', { x1: x0, y1: yMid + amp + 12, x2: x1, y2: yMid + amp + 12, class: 'duct-wall' }));
    const closedUp = g.ends === 'closed-closed' || (g.ends === 'open-closed' && closedEnd.select.value === 'upstream');
    const closedDown = g.ends === 'closed-closed' || (g.ends === 'open-closed' && closedEnd.select.value === 'downstream');
    if (closedUp) root2.append(svg('line', { x1: x0, y1: yMid - amp - 12, x2: x0, y2: yMid + amp + 12, class: 'duct-cap' }));
    if (closedDown) root2.append(svg('line', { x1: x1, y1: yMid - amp - 12, x2: x1, y2: yMid + amp + 12, class: 'duct-cap' }));
    root2.append(svg('line', { x1: x0, y1: yMid, x2: x1, y2: yMid, class: 'duct-axis' }));
    const path = (values: Float64Array): string => {
      let d = '';
      for (let i = 0; i < values.length; i++) d += `${i === 0 ? 'M' : 'L'}${sx(shape.xM[i]).toFixed(1)},${(yMid - amp * values[i]).toFixed(1)}`;
      return d;
    };
    root2.append(svg('path', { d: path(shape.pressure), class: 'duct-p' }));
    root2.append(svg('path', { d: path(shape.velocity), class: 'duct-u' }));
    if (g.heaterPositionM !== undefined) {
      const hx = sx(g.heaterPositionM);
      root2.append(svg('line', { x1: hx, y1: yMid - amp - 12, x2: hx, y2: yMid + amp + 12, class: 'duct-heater' }));
      const lab = svg('text', { x: Math.min(Math.max(hx, x0 + 90), x1 - 90), y: yMid + amp + 40, 'text-anchor': 'middle', class: 'duct-label' });
      lab.textContent = `heater ${formatQuantity(g.heaterPositionM, 'm', null, { decimals: 2 })}`;
      root2.append(lab);
    }
    const lower = svg('text', { x: x0, y: H - 6, 'text-anchor': 'start', class: 'duct-label' });
    lower.textContent = 'lower end';
    const upper = svg('text', { x: x1, y: H - 6, 'text-anchor': 'end', class: 'duct-label' });
    upper.textContent = `upper end, ${formatQuantity(g.lengthM, 'm', null, { decimals: 2 })}`;
    const legendP = svg('text', { x: x0, y: 26, class: 'duct-label duct-label-p' });
    legendP.textContent = '— pressure';
    const legendU = svg('text', { x: x0 + 140, y: 26, class: 'duct-label duct-label-u' });
    legendU.textContent = '- - velocity';
    const legendM = svg('text', { x: x1, y: 26, 'text-anchor': 'end', class: 'duct-label' });
    legendM.textContent = `mode ${mode.n}, ${formatHz(mode.frequencyHz)}`;
    root2.append(lower, upper, legendP, legendU, legendM);
    sketchHost.replaceChildren(root2, el('figcaption', { className: 'hint', textContent: 'Relative amplitudes along the duct; pressure and velocity are a quarter cycle apart in time.' }));
    if (g.heaterPositionM === undefined) {
      rayleighOut.textContent = 'Add a heater to see whether it drives or damps this mode (Rayleigh criterion).';
    } else {
      const r = rayleighReading(model, mode.frequencyHz, g.heaterPositionM, flow.select.value as MeanFlow);
      rayleighOut.textContent = `Rayleigh reading for mode ${mode.n}: ${readingText(r.reading)} — ${r.message}.`;
    }
  }

  const onEdit = (): void => update(true);
  for (const input of [length.input, diameter.input, temp.input, heaterPos.input, hotTemp.input]) input.addEventListener('input', onEdit);
  for (const s of [ends.select, closedEnd.select, openEnd.select, flow.select]) s.addEventListener('change', onEdit);
  heaterBox.addEventListener('change', onEdit);
  for (const input of [measured.input, fStd.input, lStd.input]) {
    input.addEventListener('input', () => {
      saveJson(EXTRAS_KEY, { ...loadJson<Extras>(EXTRAS_KEY, DEFAULT_EXTRAS), measuredHz: measured.input.value, frequencyStdHz: fStd.input.value, lengthStdMm: lStd.input.value });
      renderMatch();
      renderSketch();
    });
  }
  modePick.select.addEventListener('change', renderSketch);
  fromSession.select.addEventListener('change', () => {
    const f = parseDecimal(fromSession.select.value);
    if (f === null) return;
    measured.input.value = String(f);
    measured.input.dispatchEvent(new Event('input'));
  });

  /** Fills the session picker with the main tone of the most recent sessions that have one. */
  async function loadSessionTones(): Promise<void> {
    try {
      const sessions = await callStore('list');
      const withTone = sessions.filter((r) => typeof r.report?.summary.frequencyHz === 'number' && Number.isFinite(r.report.summary.frequencyHz)).slice(0, 12);
      const options = withTone.map((r) => {
        const f = r.report?.summary.frequencyHz ?? 0;
        const name = [r.meta.site, r.meta.equipment].filter((t) => t.trim() !== '').join(', ') || new Date(r.createdAtMs).toLocaleString();
        return el('option', { value: String(Number(f.toFixed(3))), textContent: `${name}: ${formatHz(f)}` });
      });
      fromSession.select.replaceChildren(el('option', { value: '', textContent: withTone.length ? 'choose a session…' : 'no session with a tone yet' }), ...options);
      fromSession.select.disabled = withTone.length === 0;
      fromSessionHint.textContent = withTone.length ? 'The main tone of the session’s report.' : 'Sessions appear here once they have a main tone.';
    } catch (err) {
      fromSession.select.replaceChildren(el('option', { value: '', textContent: 'sessions unavailable' }));
      fromSession.select.disabled = true;
      fromSessionHint.textContent = `The stored sessions could not be read: ${err instanceof Error ? err.message : String(err)}.`;
    }
  }

  app.onShow('duct', (param) => {
    const f = param !== undefined ? parseDecimal(param) : null;
    if (f !== null && f > 0) {
      measured.input.value = String(f);
      app.notify(`Tone of ${formatHz(f)} taken from the session.`);
    }
    update();
    void loadSessionTones();
  });
  update();
};

/** The measured-tone result: the best plausible mode and its temperature, then every candidate mode with the temperature it implies. */
function matchView(m: MeasuredMatch, fHz: number): HTMLElement[] {
  const best = m.best;
  const what = m.isEquivalentTemperature ? 'Equivalent uniform gas temperature' : 'Mean gas temperature';
  const out: HTMLElement[] = [];
  if (best) {
    const dev = best.relativeDeviation * 100;
    out.push(
      el('p', {
        className: 'duct-match-mode',
        textContent: `${formatHz(fHz)} is mode ${best.n}${m.isAmbiguous ? ', or another mode below' : ''} (predicted ${formatQuantity(best.predictedHz, 'Hz', null, { decimals: 2 })} at the temperatures above, ${dev >= 0 ? '+' : ''}${formatFixed(dev, 1)} %).`,
      }),
      el('p', { className: 'duct-match-temp', textContent: `${what} for an exact match: ${formatQuantity(best.temperatureC, '°C', best.temperatureCi95C, { decimals: 0 })}.` }),
    );
  } else {
    out.push(el('p', { className: 'duct-match-mode', textContent: `${formatHz(fHz)} is no mode of this duct at a plausible gas temperature (${formatFixed(m.plausibleRangeC[0], 0)} to ${formatFixed(m.plausibleRangeC[1], 0)} °C).` }));
  }
  if (m.candidates.length > 0) {
    const body = el('tbody');
    for (const c of m.candidates) {
      const verdict = c.plausible ? (c === best ? 'yes (best)' : 'yes') : c.isAboveCutOn ? 'no: above the cross-mode cut-on' : 'no: implausible temperature';
      body.append(el('tr', { className: c.plausible ? 'plausible' : 'implausible' }, el('td', { textContent: String(c.n) }), el('td', { className: 'num', textContent: formatQuantity(c.temperatureC, '°C', c.temperatureCi95C, { decimals: 0 }) }), el('td', { textContent: verdict })));
    }
    out.push(
      el(
        'table',
        { className: 'segments duct-candidates' },
        el('caption', { textContent: `Every mode ${formatHz(fHz)} can be, with the ${m.isEquivalentTemperature ? 'equivalent uniform ' : ''}gas temperature it needs` }),
        el('thead', {}, el('tr', {}, el('th', { scope: 'col', textContent: 'Mode' }), el('th', { scope: 'col', textContent: 'Gas temperature' }), el('th', { scope: 'col', textContent: 'Plausible' }))),
        body,
      ),
    );
  }
  out.push(...m.warnings.map((w) => el('p', { className: 'hint', textContent: `Note: ${w}.` })));
  return out;
}

function readingText(r: 'drives' | 'damps' | 'neutral'): string {
  return r === 'drives' ? 'drives' : r === 'damps' ? 'damps' : 'no driving';
}

/** A number as typed in a form (no trailing zeros, at most 6 decimals). */
function formatPlain(v: number): string {
  return String(Number(v.toFixed(6)));
}
