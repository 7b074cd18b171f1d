/**
 * Comparison of two or more sessions (before/after a fix): amplitude-in-dB curves overlaid with
 * their onsets aligned at zero, and their growth and decay rates side by side with 95 % intervals.
 */
import type { Report, TrackFrame } from '../../dsp/types';
import { formatDb, formatHz, formatQ, formatRate, formatRatio } from '../format';
import type { FullSession } from '../storage/sessions';
import { callStore } from '../storage/off-thread';
import { intervalChart, SERIES_COLORS, timeChart } from './session-charts';
import { formatLocalStamp, sessionTitle, type SessionView } from './session-context';
import { h, table } from './session-dom';
import { beforeAfterSentences } from '../run/compare';

/**
 * Time of the first onset, s: the report's first onset, else the start of the first growth
 * frame of the track, else 0 (the curves are then aligned at their starts).
 */
export function onsetTimeS(report: Report | null, track: readonly TrackFrame[]): { timeS: number; how: string } {
  const o = report?.onsets[0];
  if (o && Number.isFinite(o.timeS)) return { timeS: o.timeS, how: 'onset' };
  const g = report?.segments.find((s) => s.kind === 'growth');
  if (g) return { timeS: g.startS, how: 'start of growth' };
  const f = track.find((x) => x.state === 'growth');
  if (f) return { timeS: f.timeS, how: 'start of growth' };
  return { timeS: 0, how: 'start of recording (no onset)' };
}

export async function renderCompare(host: HTMLElement, ids: string[]): Promise<SessionView> {
  const sessions: FullSession[] = [];
  for (const id of ids.slice(0, SERIES_COLORS.length)) {
    const s = await callStore('load', id);
    if (s) sessions.push(s);
  }
  const back = h('p', {}, h('a', { text: '← All sessions', attrs: { href: '#sessions' } }));
  if (sessions.length < 2) {
    host.replaceChildren(back, h('h2', { text: 'Compare sessions' }), h('p', { className: 'alert', text: 'Select at least two stored sessions in the list to compare them.' }));
    return { destroy: () => undefined };
  }
  // Label each by date when titles repeat (the same rig before and after a fix).
  const titles = sessions.map((s) => sessionTitle(s.record.meta.site, s.record.meta.equipment, s.record.meta.fileName));
  const labels = sessions.map((s, k) => (titles.filter((t) => t === titles[k]).length > 1 ? `${titles[k]} ${formatLocalStamp(s.record.createdAtMs)}` : titles[k]));
  const shortLabels = sessions.map((s, k) => `${k + 1}. ${formatLocalStamp(s.record.createdAtMs).slice(5)}`);
  const onsets = sessions.map((s) => onsetTimeS(s.record.report, s.track));
  const chart = timeChart({
    title: 'Tone amplitude (dBFS) against time since onset (s)',
    xLabel: 'time since onset (s)',
    yLabel: 'dBFS',
    series: sessions.map((s, k) => ({ label: shortLabels[k], color: SERIES_COLORS[k], x: s.track.map((f) => f.timeS - onsets[k].timeS), y: s.track.map((f) => f.amplitudeDbfs) })),
    heightPx: 260,
    maxSpan: 100,
  });
  const rows = sessions.map((s, k) => {
    const sum = s.record.report?.summary;
    return { sum, k };
  });
  const growth = intervalChart(
    'Growth rate (95 % CI)',
    'growth rate (1/s)',
    rows.map(({ sum, k }) => ({ label: shortLabels[k], value: sum?.growthRatePerS ?? null, ci: sum?.growthRateCi95PerS ?? null, color: SERIES_COLORS[k], text: formatRate(sum?.growthRatePerS, sum?.growthRateCi95PerS, 'no growth fitted') })),
  );
  const decay = intervalChart(
    'Decay rate (95 % CI)',
    'decay rate (1/s)',
    rows.map(({ sum, k }) => ({ label: shortLabels[k], value: sum?.decayRatePerS ?? null, ci: sum?.decayRateCi95PerS ?? null, color: SERIES_COLORS[k], text: formatRate(sum?.decayRatePerS, sum?.decayRateCi95PerS, 'no decay fitted') })),
  );
  const figures = table(
    'segments compare-table',
    'Figures side by side',
    ['', 'session', 'aligned at', 'frequency', 'growth rate', 'decay rate', 'damping ratio', 'Q', 'limit amplitude'],
    rows.map(({ sum, k }) => [
      String(k + 1),
      labels[k],
      onsets[k].how,
      formatHz(sum?.frequencyHz),
      formatRate(sum?.growthRatePerS, sum?.growthRateCi95PerS, 'no growth fitted'),
      formatRate(sum?.decayRatePerS, sum?.decayRateCi95PerS, 'no decay fitted'),
      formatRatio(sum?.dampingRatio, sum?.dampingRatioCi95),
      formatQ(sum?.qFactor, sum?.qFactorCi95),
      formatDb(sum?.limitAmplitudeDbfs, 'dBFS', null, 'no limit cycle'),
    ]),
  );
  // Before and after: the earliest and the latest of the sessions compared.
  const byTime = sessions.map((s, k) => ({ s, k })).sort((a, b) => a.s.record.createdAtMs - b.s.record.createdAtMs);
  const first = byTime[0];
  const last = byTime[byTime.length - 1];
  const sentence = h(
    'div',
    { className: 'before-after', attrs: { id: 'compare-sentence' } },
    h('h3', { className: 'section-title', text: `Before (${first.k + 1}) and after (${last.k + 1})` }),
    ...beforeAfterSentences(first.s.record.report?.summary, last.s.record.report?.summary).map((t) => h('p', { text: t })),
  );
  const legend = h('ol', { className: 'compare-legend' }, ...sessions.map((s, k) => h('li', {}, h('span', { className: 'swatch', attrs: { style: `background:${SERIES_COLORS[k]}` } }), h('a', { text: labels[k], attrs: { href: `#sessions/${encodeURIComponent(s.record.id)}` } }))));
  host.replaceChildren(
    back,
    h('h2', { text: `Compare ${sessions.length} sessions` }),
    legend,
    sentence,
    h('div', { className: 'plots' }, chart.figure),
    h('figure', { className: 'plot' }, growth),
    h('figure', { className: 'plot' }, decay),
    figures,
    h('p', { className: 'hint', text: 'Intervals that do not overlap show a difference beyond the measurement scatter; overlapping intervals do not prove the sessions equal.' }),
  );
  return { destroy: chart.destroy };
}
