/**
 * The stability map: net growth/decay rate and limit-cycle amplitude against the control value
 * of the settings markers, across sessions, with the path the settings took in time, the onset
 * and shut-off thresholds and the hysteresis between them.
 */
import { formatClock, formatDb, formatQuantity, formatRate } from '../format';
import type { SessionRecord } from '../storage/db';
import { listSessions } from '../storage/sessions';
import { buildStabilityMap, type MapStep } from '../storage/stability';
import { scatterChart } from './session-charts';
import { formatLocalStamp, sessionTitle, type SessionsContext, type SessionView } from './session-context';
import { cssVar, h, table } from './session-dom';

function controlText(x: number | null, unit: string): string {
  return formatQuantity(x, unit, null, { significant: 3, reason: 'not observed' });
}

export async function renderMap(host: HTMLElement, ctx: SessionsContext, ids: string[] | null, unitWanted?: string): Promise<SessionView> {
  const db = await ctx.db();
  const all = await listSessions(db);
  const chosen: SessionRecord[] = ids ? all.filter((s) => ids.includes(s.id)) : all;
  const map = buildStabilityMap(chosen.map((s) => ({ id: s.id, createdAtMs: s.createdAtMs, durationS: s.durationS, markers: s.markers, report: s.report })), unitWanted);
  // Several control quantities (e.g. % and W): one map at a time, chosen here.
  const unitPicker =
    map.units.length > 1
      ? h(
          'div',
          { className: 'field' },
          h('label', { text: 'Control quantity', attrs: { for: 'map-unit' } }),
          (() => {
            const sel = h('select', { attrs: { id: 'map-unit' } }, ...map.units.map((u) => {
              const o = h('option', { text: `${u.unit || '(no unit)'} — ${u.count} setting${u.count === 1 ? '' : 's'}` });
              o.value = u.unit;
              o.selected = u.unit === map.unit;
              return o;
            }));
            sel.addEventListener('change', () => void renderMap(host, ctx, ids, sel.value));
            return sel;
          })(),
        )
      : null;
  const back = h('p', {}, h('a', { text: '← All sessions', attrs: { href: '#sessions' } }));
  const heading = h('h2', { text: 'Stability map' });
  const headParts: Node[] = [back, heading];
  if (unitPicker) headParts.push(unitPicker);
  const scope = h('p', { className: 'hint', text: ids ? `${chosen.length} selected session${chosen.length === 1 ? '' : 's'}.` : `All ${chosen.length} stored session${chosen.length === 1 ? '' : 's'}.` });
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
  const findings = h(
    'ul',
    { className: 'map-findings' },
    h('li', { text: `Onset (stable → humming): ${controlText(map.onsetControl, unit)}${first('onset')}` }),
    h('li', { text: `Shut-off (humming → stable): ${controlText(map.shutOffControl, unit)}${first('shut-off')}` }),
    h('li', { text: `Hysteresis (onset − shut-off): ${controlText(map.hysteresis, unit)}` }),
    h('li', { text: `Net rate crosses zero at: ${controlText(map.zeroRateControl, unit)} (linear interpolation between neighbouring settings)` }),
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
