/**
 * One session: its figures with 95 % intervals, plots (amplitude in dB and frequency against
 * time, markers drawn in), segments, markers, history; editable site, equipment and notes;
 * export (bundle, CSV, WAV, printable report) and delete with undo.
 */
import type { Report } from '../../dsp/types';
import { formatClock, formatDb, formatHz, formatMissing, formatQ, formatRate, formatRatio, formatSeconds, isShowable } from '../format';
import { TEXT_LIMITS } from '../storage/bundle-schema';
import { bundleOptions } from '../settings';
import { sessionBaseName, sessionWav, shareOrDownload, trackCsv } from '../storage/export';
import { buildReportHtml } from '../storage/report-html';
import type { FullSession } from '../storage/sessions';
import { callStore } from '../storage/off-thread';
import { SERIES_COLORS, timeChart } from './session-charts';
import { formatLocalStamp, sessionTitle, type SessionsContext, type SessionView } from './session-context';
import { cssVar, formatBytes, h, table } from './session-dom';
import { conditionsEditor, markerEditor } from './session-edit';
import { reanalysisPanel } from './session-reanalyse';
import { cyclesTable, modeStatisticsTable } from './run-result';

/** Rows of the result table: label and formatted value (with unit and interval). */
export function summaryRows(report: Report | null, calibrationOffsetDb?: number): [string, string][] {
  if (!report) return [['Report', '— (not available)']];
  const s = report.summary;
  const rows: [string, string][] = [
    ['Frequency', formatHz(s.frequencyHz)],
    ['Growth rate', formatRate(s.growthRatePerS, s.growthRateCi95PerS, 'no growth fitted')],
    ['Decay rate', formatRate(s.decayRatePerS, s.decayRateCi95PerS, 'no decay fitted')],
    ['Effective gain', formatRate(s.effectiveGainPerS, s.effectiveGainCi95PerS, 'needs growth and decay')],
    ['Damping ratio', formatRatio(s.dampingRatio, s.dampingRatioCi95)],
    ['Q', formatQ(s.qFactor, s.qFactorCi95)],
    ['Doubling time', formatSeconds(s.doublingTimeS, null, 'no growth fitted')],
    ['T60', formatSeconds(s.t60S, null, 'no decay fitted')],
    ['Limit-cycle amplitude', formatDb(s.limitAmplitudeDbfs, 'dBFS', null, 'no limit cycle')],
  ];
  if (typeof calibrationOffsetDb === 'number' && typeof s.limitAmplitudeDbfs === 'number') rows.push(['Limit-cycle level', formatDb(s.limitAmplitudeDbfs + calibrationOffsetDb, 'dB SPL')]);
  // Report version 2: the main tone's rates across its cycles (the pooled rates above weigh each fit by its interval).
  if (typeof s.cycleCount === 'number' && s.cycleCount >= 2) {
    const median = (m: number | null | undefined, spread: number | null | undefined, what: string): string =>
      isShowable(m) ? `median ${formatRate(m)}, spread ${formatRate(spread, null, 'not known')} over ${s.cycleCount} cycles` : formatMissing(`fewer than two cycles with a ${what}`);
    rows.push(['Growth rate across cycles', median(s.growthRateCycleMedianPerS, s.growthRateCycleSpreadPerS, 'growth')]);
    rows.push(['Decay rate across cycles', median(s.decayRateCycleMedianPerS, s.decayRateCycleSpreadPerS, 'decay')]);
  }
  return rows;
}

export async function renderDetail(host: HTMLElement, ctx: SessionsContext, id: string): Promise<SessionView> {
  const full = await callStore('load', id);
  if (!full) {
    host.replaceChildren(h('p', { className: 'alert', text: 'This session is not stored on this device (deleted, or the link is from another device).' }), h('a', { className: 'big-link', text: 'All sessions', attrs: { href: '#sessions' } }));
    return { destroy: () => undefined };
  }
  const destroyers: (() => void)[] = [];
  const { record, track } = full;
  const m = record.meta;
  const title = h('h2', { text: sessionTitle(m.site, m.equipment, m.fileName), attrs: { id: 'session-title' } });
  const offset = typeof m.calibrationOffsetDb === 'number' && Number.isFinite(m.calibrationOffsetDb) ? m.calibrationOffsetDb : undefined;

  // Editable details.
  const site = h('input', { attrs: { type: 'text', id: 'edit-site', maxlength: String(TEXT_LIMITS.site), autocomplete: 'off' } });
  site.value = m.site;
  const equipment = h('input', { attrs: { type: 'text', id: 'edit-equipment', maxlength: String(TEXT_LIMITS.equipment), autocomplete: 'off' } });
  equipment.value = m.equipment;
  const notes = h('textarea', { attrs: { id: 'edit-notes', rows: '4', maxlength: String(TEXT_LIMITS.notes) } });
  notes.value = m.notes;
  const formMsg = h('p', { className: 'hint', attrs: { 'aria-live': 'polite' } });
  const save = h('button', { className: 'small-button', text: 'Save details', attrs: { type: 'submit' } });
  const form = h(
    'form',
    { className: 'session-edit' },
    h('fieldset', {}, h('legend', { text: 'Details' }),
      h('div', { className: 'field' }, h('label', { text: 'Site', attrs: { for: 'edit-site' } }), site),
      h('div', { className: 'field' }, h('label', { text: 'Equipment', attrs: { for: 'edit-equipment' } }), equipment),
      h('div', { className: 'field' }, h('label', { text: 'Notes', attrs: { for: 'edit-notes' } }), notes),
      save,
      formMsg,
    ),
  );
  form.addEventListener('submit', async (e) => {
    e.preventDefault();
    try {
      const next = await callStore('updateMeta', id, { site: site.value.trim(), equipment: equipment.value.trim(), notes: notes.value });
      full.record = next;
      title.textContent = sessionTitle(next.meta.site, next.meta.equipment, next.meta.fileName);
      formMsg.className = 'hint';
      formMsg.textContent = 'Saved.';
    } catch (err) {
      formMsg.className = 'field-error';
      formMsg.textContent = `Not saved: ${err instanceof Error ? err.message : String(err)}`;
    }
  });

  // Figures.
  const result = h('div', { className: 'table-scroll' }, h('table', { className: 'segments result-table' }, h('caption', { text: 'Result (95 % intervals)' }), h('tbody', {}, ...summaryRows(record.report, offset).map(([k, v]) => h('tr', {}, h('th', { text: k, attrs: { scope: 'row' } }), h('td', { text: v }))))));

  // Plots.
  const times = track.map((f) => f.timeS);
  const unit = offset !== undefined ? 'dB SPL' : 'dBFS';
  const marks = record.markers.map((k) => ({ x: k.timeS, label: k.label }));
  const plots = h('div', { className: 'plots' });
  if (track.length) {
    const amp = timeChart({
      title: `Tone amplitude and broadband level (${unit}) against time (s)`,
      xLabel: 'time (s)',
      yLabel: unit,
      series: [
        { label: 'tone amplitude', color: cssVar('--plot-tone', SERIES_COLORS[0]), x: times, y: track.map((f) => f.amplitudeDbfs + (offset ?? 0)) },
        { label: 'broadband level', color: cssVar('--plot-level', '#777'), x: times, y: track.map((f) => f.levelDbfs + (offset ?? 0)) },
      ],
      marks,
      maxSpan: 100,
    });
    const freq = timeChart({ title: 'Frequency of the main tone (Hz) against time (s)', xLabel: 'time (s)', yLabel: 'Hz', series: [{ label: 'frequency', color: cssVar('--plot-growth', SERIES_COLORS[1]), x: times, y: track.map((f) => f.frequencyHz) }], marks });
    plots.append(amp.figure, freq.figure);
    destroyers.push(amp.destroy, freq.destroy);
  } else {
    plots.append(h('p', { className: 'hint', text: 'No track was stored for this session.' }));
  }

  const r = record.report;
  const segs = r?.segments.length
    ? table('segments', 'Segments', ['kind', 'time (m:s)', 'frequency', 'rate (95 % CI)', 'model'], r.segments.map((g) => [g.kind, `${formatClock(g.startS)}–${formatClock(g.endS)}`, formatHz(g.frequencyHz), g.ratePerS === null ? '—' : formatRate(g.ratePerS, g.rateCi95PerS), g.model ?? '']))
    : null;
  const cycles = r ? cyclesTable(r) : null;
  const margins = r ? modeStatisticsTable(r) : null;
  const noise = r?.noiseDriven.length
    ? table('segments', 'Damping of the quiet system (noise-driven)', ['time (m:s)', 'frequency', 'decay rate (95 % CI)'], r.noiseDriven.map((n) => [`${formatClock(n.startS)}–${formatClock(n.endS)}`, formatHz(n.frequencyHz), formatRate(n.decayRatePerS, n.decayRateCi95PerS)]))
    : null;
  const markers = markerEditor(id, record.markers, (next) => {
    full.record = { ...full.record, markers: next };
  });
  const conditions = conditionsEditor(id, m.geometry, offset, (next) => {
    full.record = next;
  });
  const notesList = [...(r?.warnings ?? []), ...record.history];

  // Exports.
  const base = sessionBaseName(record);
  const deliver = async (make: () => Uint8Array | Promise<Uint8Array>, name: string, type: string): Promise<void> => {
    try {
      const bytes = await make();
      const how = await shareOrDownload(bytes, name, type);
      if (how !== 'cancelled') ctx.app.notify(`${how === 'shared' ? 'Shared' : 'Saved'} ${name} (${formatBytes(bytes.length)}).`, 'info');
    } catch (err) {
      ctx.app.notify(`Export failed: ${err instanceof Error ? err.message : String(err)}`, 'error');
    }
  };
  const current = (): FullSession => full;
  const button = (text: string, idAttr: string, fn: () => void | Promise<void>, isDisabled = false): HTMLButtonElement => {
    const b = h('button', { className: 'small-button', text, attrs: { type: 'button', id: idAttr } });
    b.disabled = isDisabled;
    b.addEventListener('click', () => void fn());
    return b;
  };
  const actions = h(
    'div',
    { className: 'controls session-actions' },
    button('Export bundle (.zip)', 'export-bundle', () => deliver(async () => (await callStore('bundle', [id], Date.now(), bundleOptions())).bytes, `${base}.zip`, 'application/zip')),
    button('Track (.csv)', 'export-csv', () => deliver(() => new TextEncoder().encode(trackCsv(track, offset, current().record.report)), `${base}-track.csv`, 'text/csv')),
    button('Audio (.wav)', 'export-wav', () => deliver(() => sessionWav(full.audio as Float32Array, m.sampleRateHz), `${base}.wav`, 'audio/wav'), !full.audio),
    button('Printable report (.html)', 'export-html', () => deliver(() => new TextEncoder().encode(buildReportHtml(current().record, track, Date.now())), `${base}-report.html`, 'text/html')),
    button('Delete', 'delete-session', () => ctx.deleteWithUndo(id, sessionTitle(current().record.meta.site, current().record.meta.equipment, current().record.meta.fileName))),
  );

  const facts = `${formatLocalStamp(record.createdAtMs)} · ${formatSeconds(record.durationS)} · ${m.sampleRateHz} Hz · ${m.source}${m.fileName ? ` (${m.fileName})` : ''} · ${full.audio ? `audio kept (${formatSeconds(full.audio.length / m.sampleRateHz)})` : `no audio${record.audio.stoppedReason ? ` (${record.audio.stoppedReason})` : ''}`}`;
  const parts: (Node | null)[] = [
    h('p', {}, h('a', { text: '← All sessions', attrs: { href: '#sessions' } })),
    title,
    record.status !== 'complete' ? h('p', { className: `badge badge-${record.status}`, text: record.status === 'recovered' ? 'Recovered after an interrupted recording' : record.status }) : null,
    h('p', { className: 'session-facts', text: facts }),
    actions,
    result,
    typeof r?.summary.frequencyHz === 'number' && Number.isFinite(r.summary.frequencyHz)
      ? h('p', {}, h('a', { className: 'big-link', attrs: { href: `#duct/${r.summary.frequencyHz.toFixed(2)}`, id: 'check-duct-mode' }, text: `Which duct mode is ${formatHz(r.summary.frequencyHz)}? Open the duct model` }))
      : null,
    plots,
    cycles,
    margins,
    segs,
    noise,
    markers,
    reanalysisPanel(full, () => ctx.go(id)),
    notesList.length ? h('div', {}, h('h3', { className: 'section-title', text: 'Warnings and history' }), h('ul', { className: 'notes' }, ...notesList.map((w) => h('li', { text: w })))) : null,
    form,
    conditions,
  ];
  host.replaceChildren(...parts.filter((p): p is Node => p !== null));
  return { destroy: () => destroyers.forEach((d) => d()) };
}
