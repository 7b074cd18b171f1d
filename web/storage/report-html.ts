/**
 * The printable report of a session: one self-contained HTML file with the plots as inline SVG,
 * no script and a Content Security Policy that forbids any. All user text is escaped.
 */
import type { TrackFrame } from '../../dsp/types';
import { formatClock, formatDb, formatHz, formatQ, formatQuantity, formatRate, formatRatio, formatSeconds } from '../format';
import type { SessionRecord } from './db';
import { escapeXml, svgLinePlot } from './svg-plot';
import { cycleCells, cycledTones, cycleMedianLine, cyclesOf, CYCLE_COLUMNS, steadyLinesLine, toneHeading } from '../run/cycles';

const esc = escapeXml;

function row(label: string, value: string): string {
  return `<tr><th scope="row">${esc(label)}</th><td>${esc(value)}</td></tr>`;
}

/** Date and time of a ms timestamp as ISO-like UTC text ("2026-12-02 03:41 UTC"). */
export function formatStamp(ms: number): string {
  const d = new Date(ms);
  if (Number.isNaN(d.getTime())) return '—';
  return `${d.toISOString().slice(0, 16).replace('T', ' ')} UTC`;
}

/** Amplitude and frequency plots of a track as SVG, with the markers drawn as dashed lines. */
export function trackPlotsSvg(record: SessionRecord, track: readonly TrackFrame[]): string {
  const t = track.map((f) => f.timeS);
  const offset = record.meta.calibrationOffsetDb;
  const hasSpl = typeof offset === 'number' && Number.isFinite(offset);
  const unit = hasSpl ? 'dB SPL' : 'dBFS';
  const marks = record.markers.map((m) => ({ x: m.timeS, label: m.label }));
  const amp = svgLinePlot({
    title: `Tone amplitude (${unit}) against time`,
    xLabel: 'time (s)',
    yLabel: unit,
    series: [
      { x: t, y: track.map((f) => f.amplitudeDbfs + (hasSpl ? (offset as number) : 0)), label: 'tone amplitude', color: '#0a6aa1' },
      { x: t, y: track.map((f) => f.levelDbfs + (hasSpl ? (offset as number) : 0)), label: 'broadband level', color: '#999' },
    ],
    marks,
    // The axis covers the sound, not digital silence far below it.
    maxYSpan: 100,
  });
  const freq = svgLinePlot({
    title: 'Tracked frequency (Hz) against time',
    xLabel: 'time (s)',
    yLabel: 'Hz',
    series: [{ x: t, y: track.map((f) => f.frequencyHz), label: 'main tone', color: '#a15c0a' }],
    marks,
  });
  return amp + freq;
}

/** The whole report as an HTML document (string). */
export function buildReportHtml(record: SessionRecord, track: readonly TrackFrame[], exportedAtMs: number): string {
  const m = record.meta;
  const r = record.report;
  const s = r?.summary;
  const title = `Hum session ${m.site || 'unnamed site'} ${m.equipment ? `– ${m.equipment}` : ''}`.trim();
  const metaRows = [
    row('Site', m.site || '—'),
    row('Equipment', m.equipment || '—'),
    row('Recorded', formatStamp(record.createdAtMs)),
    row('Duration', formatSeconds(record.durationS)),
    row('Status', record.status),
    row('Source', m.fileName ? `${m.source} (${m.fileName})` : m.source),
    row('Sample rate', formatQuantity(m.sampleRateHz, 'Hz', null, { decimals: 0 })),
    row('Calibration', typeof m.calibrationOffsetDb === 'number' ? `${formatDb(m.calibrationOffsetDb, 'dB')} added to dBFS${m.calibrationSource ? ` (${m.calibrationSource})` : ''}` : 'none (levels in dBFS)'),
    row('Raw audio', record.audio.isKept ? `kept (${formatSeconds(record.audio.sampleCount / m.sampleRateHz)})` : `not kept${record.audio.stoppedReason ? ` (${record.audio.stoppedReason})` : ''}`),
  ];
  if (m.geometry) {
    const g = m.geometry;
    metaRows.push(row('Duct', `${formatQuantity(g.lengthM, 'm')} long, ${formatQuantity(g.diameterM, 'm')} diameter, ${g.ends}, open end ${g.openEnd}, gas ${formatQuantity(g.gasTemperatureC, '°C')}`));
  }
  const summaryRows = s
    ? [
        row('Frequency', formatHz(s.frequencyHz)),
        row('Growth rate', formatRate(s.growthRatePerS, s.growthRateCi95PerS, 'no growth fitted')),
        row('Decay rate', formatRate(s.decayRatePerS, s.decayRateCi95PerS, 'no decay fitted')),
        row('Effective gain', formatRate(s.effectiveGainPerS, s.effectiveGainCi95PerS, 'needs growth and decay')),
        row('Damping ratio', formatRatio(s.dampingRatio, s.dampingRatioCi95)),
        row('Q', formatQ(s.qFactor, s.qFactorCi95)),
        row('Limit-cycle amplitude', formatDb(s.limitAmplitudeDbfs, 'dBFS', null, 'no limit cycle')),
      ].join('')
    : row('Report', 'not available');
  const segRows = (r?.segments ?? [])
    .map((g) => `<tr><td>${esc(g.kind)}</td><td>${esc(formatClock(g.startS))}–${esc(formatClock(g.endS))}</td><td>${esc(formatHz(g.frequencyHz))}</td><td>${esc(g.ratePerS === null ? '—' : formatRate(g.ratePerS, g.rateCi95PerS))}</td><td>${esc(g.model ?? '')}</td></tr>`)
    .join('');
  const rc = r ? cyclesOf(r) : null;
  const cycleTones = rc ? cycledTones(rc) : [];
  const head = `<thead><tr>${CYCLE_COLUMNS.map((c) => `<th>${esc(c)}</th>`).join('')}</tr></thead>`;
  const cycleSections = cycleTones
    .map((t) => {
      const harmonics = t.harmonics.length ? `<p>Harmonics (locked to this tone): ${esc(t.harmonics.map((h) => `${h.k} × = ${formatHz(h.frequencyHz)}`).join(', '))}</p>` : '';
      const rows = t.cycles.map((c, k) => `<tr>${cycleCells(c, k).map((x) => `<td>${esc(x)}</td>`).join('')}</tr>`).join('');
      return `<h3>${esc(toneHeading(t))}</h3>${harmonics}${t.cycles.length ? `${t.cycles.length >= 2 ? `<p>${esc(cycleMedianLine(t))}</p>` : ''}<table>${head}<tbody>${rows}</tbody></table>` : ''}`;
    })
    .join('');
  const steadyLines = rc ? steadyLinesLine(rc) : '';
  const cycleNote = rc?.missing.length ? `<p>Report version ${rc.reportVersion}: ${esc(rc.missing.join('; '))}.</p>` : '';
  const markerRows = record.markers
    .map((k) => `<tr><td>${esc(formatClock(k.timeS))}</td><td>${esc(k.kind)}</td><td>${esc(k.label)}</td><td>${esc(typeof k.value === 'number' ? `${k.value}${k.unit ? ` ${k.unit}` : ''}` : '')}</td></tr>`)
    .join('');
  const warnings = [...(r?.warnings ?? []), ...record.history].map((w) => `<li>${esc(w)}</li>`).join('');
  return `<!doctype html>
<html lang="en"><head><meta charset="utf-8">
<meta http-equiv="Content-Security-Policy" content="default-src 'none'; style-src 'unsafe-inline'; img-src data:">
<meta name="viewport" content="width=device-width, initial-scale=1">
<title>${esc(title)}</title>
<style>
body{font-family:system-ui,sans-serif;margin:1.5rem;color:#111;max-width:760px}
h1{font-size:1.3rem}h2{font-size:1.05rem;margin-top:1.4rem;border-bottom:1px solid #ccc}
table{border-collapse:collapse;width:100%;font-size:.9rem}th,td{text-align:left;padding:.2rem .4rem;border-bottom:1px solid #eee;vertical-align:top}
th[scope=row]{width:11rem;font-weight:600}.notes{white-space:pre-wrap;border:1px solid #ddd;padding:.5rem}
svg{max-width:100%;height:auto;display:block;margin:.5rem 0}
@media print{body{margin:0}h2{break-after:avoid}svg{break-inside:avoid}}
</style></head><body>
<h1>${esc(title)}</h1>
<p>Exported ${esc(formatStamp(exportedAtMs))}. Rates are amplitude e-folding rates (1/s); intervals are 95 %.</p>
<h2>Session</h2><table>${metaRows.join('')}</table>
<h2>Notes</h2><div class="notes">${esc(m.notes || '—')}</div>
<h2>Result</h2><table>${summaryRows}</table>
<h2>Plots</h2>${trackPlotsSvg(record, track)}
${cycleSections ? `<h2>Firing cycles per tone</h2>${cycleNote}${cycleSections}${steadyLines ? `<p>${esc(steadyLines)}</p>` : ''}` : ''}
<h2>Segments</h2><table><thead><tr><th>kind</th><th>time (m:s)</th><th>frequency</th><th>rate</th><th>model</th></tr></thead><tbody>${segRows || '<tr><td colspan="5">none</td></tr>'}</tbody></table>
<h2>Markers</h2><table><thead><tr><th>time (m:s)</th><th>kind</th><th>label</th><th>control value</th></tr></thead><tbody>${markerRows || '<tr><td colspan="4">none</td></tr>'}</tbody></table>
${warnings ? `<h2>Warnings and history</h2><ul>${warnings}</ul>` : ''}
</body></html>
`;
}
