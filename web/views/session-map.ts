/**
 * The stability map: net growth/decay rate and limit-cycle amplitude against the control value
 * of the settings markers, across sessions (of one piece of equipment at a time), with the path
 * the settings took in time, the onset and shut-off thresholds, the hysteresis between them and
 * the control value where a line through the rates predicts ν = 0.
 */
import { formatClock, formatDb, formatQuantity, formatRate } from '../format';
import type { SessionRecord } from '../storage/db';
import { callStore } from '../storage/off-thread';
import { buildStabilityMap, type MapStep } from '../storage/stability';
import { scatterChart } from './session-charts';
import { formatLocalStamp, sessionTitle, type SessionsContext, type SessionView } from './session-context';
import { cssVar, h, table } from './session-dom';

function controlText(x: number | null, unit: string): string {
  return formatQuantity(x, unit, null, { significant: 3, reason: 'not observed' });
}

/** Equipment name of a session for grouping ('' when not given). */
function equipmentOf(s: SessionRecord): string {
  return (s.meta.equipment ?? '').trim();
}

/** Sessions grouped by equipment: those with the most settings markers (control values) first, then the most sessions. */
function equipmentGroups(sessions: SessionRecord[]): { name: string; count: number }[] {
  const counts = new Map<string, { count: number; settings: number }>();
  for (const s of sessions) {
    const g = counts.get(equipmentOf(s)) ?? { count: 0, settings: 0 };
    g.count++;
    g.settings += s.markers.filter((m) => typeof m.value === 'number' && Number.isFinite(m.value)).length;
    counts.set(equipmentOf(s), g);
  }
  return [...counts.entries()]
    .sort((a, b) => b[1].settings - a[1].settings || b[1].count - a[1].count || a[0].localeCompare(b[0]))
    .map(([name, g]) => ({ name, count: g.count }));
}

function picker(id: string, label: string, options: { value: string; text: string }[], selected: string, onChange: (v: string) => void): HTMLElement {
  const sel = h('select', { attrs: { id } }, ...options.map((o) => {
    const opt = h('option', { text: o.text });
    opt.value = o.value;
    opt.selected = o.value === selected;
    return opt;
  }));
  sel.addEventListener('change', () => onChange(sel.value));
  return h('div', { className: 'field' }, h('label', { text: label, attrs: { for: id } }), sel);
}

export async function renderMap(host: HTMLElement, ctx: SessionsContext, ids: string[] | null, unitWanted?: string, equipmentWanted?: string): Promise<SessionView> {
  const all = await callStore('list');
  const selected: SessionRecord[] = ids ? all.filter((s) => ids.includes(s.id)) : all;
  // "All sessions" maps one piece of equipment at a time: settings of different appliances do not share a threshold.
  const groups = ids ? [] : equipmentGroups(selected);
  const equipment = groups.length > 0 ? (groups.some((g) => g.name === equipmentWanted) ? (equipmentWanted as string) : groups[0].name) : null;
  const chosen = equipment === null ? selected : selected.filter((s) => equipmentOf(s) === equipment);
  const map = buildStabilityMap(chosen.map((s) => ({ id: s.id, createdAtMs: s.createdAtMs, durationS: s.durationS, markers: s.markers, report: s.report })), unitWanted);
  // Several control quantities (e.g. % and W): one map at a time, chosen here.
  const unitPicker =
    map.units.length > 1
      ? picker('map-unit', 'Control quantity', map.units.map((u) => ({ value: u.unit, text: `${u.unit || '(no unit)'} — ${u.count} setting${u.count === 1 ? '' : 's'}` })), map.unit, (v) => void renderMap(host, ctx, ids, v, equipment ?? undefined))
      : null;
  const equipmentPicker =
    groups.length > 1
      ? picker('map-equipment', 'Equipment', groups.map((g) => ({ value: g.name, text: `${g.name || '(equipment not given)'} — ${g.count} session${g.count === 1 ? '' : 's'}` })), equipment ?? '', (v) => void renderMap(host, ctx, ids, undefined, v))
      : null;
  const back = h('p', {}, h('a', { text: '← All sessions', attrs: { href: '#sessions' } }));
  const heading = h('h2', { text: 'Stability map' });
  const headParts: Node[] = [back, heading];
  if (equipmentPicker) headParts.push(equipmentPicker);
  if (unitPicker) headParts.push(unitPicker);
  const equipmentText = equipment === null ? '' : ` of ${equipment || 'equipment not given'}`;
  const scope = h('p', {
    className: 'hint',
    text: ids ? `${chosen.length} selected session${chosen.length === 1 ? '' : 's'}.` : `All ${chosen.length} stored session${chosen.length === 1 ? '' : 's'}${equipmentText}.`,
  });
  if (map.steps.length === 0) {
    host.replaceChildren(
      ...headParts,
      scope,
      h('p', { className: 'alert', text: 'No settings with a control value yet. While recording, add a marker with a value (for example firing rate 60 % or heater power 250 W) each time the setting changes; each such span becomes a point here.' }),
    );
    return { destroy: () => undefined };
  }
  const unit = map.unit;
  const hum = cssVar('--plot-growth', '#c2410c');
  const quiet = cssVar('--plot-decay', '#047857');
  const muted = cssVar('--muted', '#555');
  const colorOf = (s: MapStep): string => (s.state === 'humming' ? hum : quiet);
  const vlines = [
    ...(map.onsetControl !== null ? [{ x: map.onsetControl, label: 'onset', color: hum }] : []),
    ...(map.shutOffControl !== null ? [{ x: map.shutOffControl, label: 'shut-off', color: quiet }] : []),
    ...(map.zeroRateControl !== null ? [{ x: map.zeroRateControl, label: 'rate = 0', color: muted }] : []),
    ...(map.predictedZero !== null && map.zeroRateControl === null ? [{ x: map.predictedZero.control, label: 'predicted ν = 0', color: muted }] : []),
  ];
  const withRate = map.steps.filter((s) => s.ratePerS !== null && Number.isFinite(s.ratePerS));
  const rateChart = scatterChart({
    title: 'Net rate (1/s) against control value',
    xLabel: `control value${unit ? ` (${unit})` : ''}`,
    yLabel: 'rate (1/s): + grows, − decays',
    points: withRate.map((s) => ({ x: s.control, y: s.ratePerS as number, ci: s.rateCi95PerS, isFilled: s.state === 'humming', color: colorOf(s), title: `${controlText(s.control, s.unit)}: ${formatRate(s.ratePerS, s.rateCi95PerS)} (${s.rateSource})` })),
    showPath: true,
    vlines,
    hlineAtZero: true,
  });
  const withAmp = map.steps.filter((s) => s.limitAmplitudeDbfs !== null);
  const ampChart = scatterChart({
    title: 'Limit-cycle amplitude (dBFS) against control value',
    xLabel: `control value${unit ? ` (${unit})` : ''}`,
    yLabel: 'limit-cycle amplitude (dBFS)',
    points: withAmp.map((s) => ({ x: s.control, y: s.limitAmplitudeDbfs as number, isFilled: true, color: hum, title: `${controlText(s.control, s.unit)}: ${formatDb(s.limitAmplitudeDbfs, 'dBFS')}` })),
    showPath: true,
    vlines,
    hlineAtZero: false,
  });
  const first = (kind: 'onset' | 'shut-off'): string => {
    const t = kind === 'onset' ? map.transitions.find((x) => x.kind === kind) : [...map.transitions].reverse().find((x) => x.kind === kind);
    return t ? ` (between ${controlText(t.fromControl, unit)} and ${controlText(t.toControl, unit)})` : '';
  };
  const hysteresisText = (): string => {
    if (map.hysteresis !== null && map.hysteresisRange !== null) {
      return `${controlText(map.hysteresis, unit)} (between ${controlText(map.hysteresisRange[0], unit)} and ${controlText(map.hysteresisRange[1], unit)})`;
    }
    if (map.onsetControl !== null && map.shutOffControl !== null) return 'not determined: the settings either side of the onset and of the shut-off do not tell them apart';
    return 'not determined: needs both an onset and a shut-off';
  };
  const predictionText = (): string => {
    const p = map.predictedZero;
    if (p === null) return 'not determined: needs rates at two or more settings';
    if (p.ci95 === null) return `not determined: the rate does not change significantly with the setting (${p.pointCount} settings)`;
    const where =
      p.extrapolation === 0
        ? 'inside the settings observed'
        : `extrapolated ${controlText(p.extrapolation, unit)} beyond the settings observed (${formatQuantity(p.extrapolationSpans, '', null, { significant: 2 })} × their span; a line cannot know curvature beyond them)`;
    return `${controlText(p.control, unit)} (95 % CI ${controlText(p.ci95[0], unit)} to ${controlText(p.ci95[1], unit)}), ${p.pointCount} settings, ${where}`;
  };
  const findings = h(
    'ul',
    { className: 'map-findings' },
    h('li', { text: `Onset (stable → humming): ${controlText(map.onsetControl, unit)}${first('onset')}` }),
    h('li', { text: `Shut-off (humming → stable): ${controlText(map.shutOffControl, unit)}${first('shut-off')}` }),
    h('li', { text: `Hysteresis (onset − shut-off): ${hysteresisText()}` }),
    h('li', { text: `Net rate crosses zero at: ${controlText(map.zeroRateControl, unit)} (linear interpolation between neighbouring settings)` }),
    h('li', { text: `Predicted from a line through the rates: ${predictionText()}` }),
  );
  const titles = new Map(chosen.map((s) => [s.id, s]));
  const isSeveral = new Set(map.steps.map((s) => s.sessionId)).size > 1;
  const steps = table(
    'segments map-steps',
    'Settings in time order',
    ['when', ...(isSeveral ? ['session'] : []), 'control', 'state', 'net rate (95 % CI)', 'limit amplitude'],
    map.steps.map((s) => {
      const rec = titles.get(s.sessionId);
      return [
        rec ? `${formatLocalStamp(rec.createdAtMs).slice(5)} +${formatClock((s.atMs - rec.createdAtMs) / 1000)}` : '',
        ...(isSeveral ? [rec ? sessionTitle(rec.meta.site, rec.meta.equipment) : s.sessionId] : []),
        controlText(s.control, s.unit),
        s.state,
        s.ratePerS === null ? '— (no fit)' : `${formatRate(s.ratePerS, s.rateCi95PerS)} (${s.rateSource})`,
        formatDb(s.limitAmplitudeDbfs, 'dBFS', null, 'no limit cycle'),
      ];
    }),
  );
  host.replaceChildren(
    ...headParts,
    scope,
    findings,
    h('figure', { className: 'plot' }, rateChart, h('figcaption', { text: 'Filled: humming; open: quiet. Arrows follow the settings in time; bars are 95 % intervals.' })),
    h('figure', { className: 'plot' }, ampChart),
    steps,
  );
  return { destroy: () => undefined };
}
