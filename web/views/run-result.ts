/**
 * The result panel of a finished run or a re-analysis: a one-line summary, the segments of the
 * record, a table per firing cycle when there are several, clipping, noise-excited resonances,
 * the analysis warnings, and what the analysis cost on this device. Tables scroll inside their box.
 */
import type { Report, RegimeKind } from '../../dsp/types';
import type { RunResult } from '../run/run-controller';
import { cycleCells, cycledTones, cycleMedianLine, cyclesOf, CYCLE_COLUMNS, steadyLinesLine, toneHeading } from '../run/cycles';
import { formatClock, formatHz, formatMissing, formatRate, formatRatio, formatSeconds, isShowable, isShowableInterval } from '../format';
import { dampingRatioOf, STABILITY_WORDS, stabilityOf } from '../run/verdict';
import { el } from './dom';

export const REGIME_WORDS: Record<RegimeKind, string> = {
  quiet: 'Quiet',
  growth: 'Growing',
  steady: 'Steady hum',
  decay: 'Dying away',
};

/** A table of text cells inside a box that scrolls sideways on a narrow screen. */
export function scrollTable(id: string, caption: string, head: string[], rows: string[][], rowData: (Record<string, string> | undefined)[] = []): HTMLElement {
  const table = el(
    'table',
    { className: 'segments', id },
    el('caption', { text: caption }),
    el('thead', {}, el('tr', {}, ...head.map((c) => el('th', { text: c, attrs: { scope: 'col' } })))),
    el(
      'tbody',
      {},
      ...rows.map((r, k) => {
        const tr = el('tr', {}, ...r.map((c) => el('td', { text: c })));
        for (const [key, v] of Object.entries(rowData[k] ?? {})) tr.dataset[key] = v;
        return tr;
      }),
    ),
  );
  return el('div', { className: 'table-scroll' }, table);
}

/** The segments table of a report. */
export function segmentsTable(report: Report): HTMLElement {
  return scrollTable(
    'segments-table',
    'Segments of the record',
    ['Regime', 'From', 'To', 'Frequency', 'Rate'],
    report.segments.map((s) => [
      REGIME_WORDS[s.kind] ?? s.kind,
      formatClock(s.startS),
      formatClock(s.endS),
      formatHz(s.frequencyHz),
      s.kind === 'quiet' ? '—' : formatRate(s.ratePerS, s.rateCi95PerS, s.kind === 'steady' ? 'steady' : 'no fit'),
    ]),
    report.segments.map((s) => ({ kind: s.kind })),
  );
}

/**
 * The cycles of each tone (harmonics listed under their tone), with the tone's median rates
 * across its cycles and their spread; null when no tone has a cycle to show (a version-1 report
 * shows its rebuilt cycles only when there are several: one is the summary already).
 */
export function cyclesTable(report: Report): HTMLElement | null {
  const rc = cyclesOf(report);
  const minCycles = rc.missing.length ? 2 : 1;
  const tones = cycledTones(rc);
  if (tones.reduce((n, t) => n + t.cycles.length, 0) < minCycles) return null;
  const box = el('div', { className: 'cycles', id: 'cycles' }, el('h3', { className: 'section-title', text: 'Firing cycles per tone' }));
  box.dataset.reportVersion = String(rc.reportVersion);
  if (rc.missing.length) {
    const whose = rc.reportVersion < 2 ? `This report is of version ${rc.reportVersion} (an earlier version of the app)` : 'This report holds no per-tone cycles (completed from the stored track)';
    box.append(el('p', { className: 'hint', id: 'cycles-old-report', text: `${whose}: ${rc.missing.join('; ')}. Re-analysing the stored audio gives them, where it was kept.` }));
  }
  tones.forEach((t, i) => {
    const section = el('section', { className: 'tone-cycles' }, el('h4', { text: toneHeading(t) }));
    section.dataset.frequencyHz = String(t.frequencyHz);
    if (t.harmonics.length) {
      section.append(el('p', { className: 'harmonics', text: `Harmonics (locked to this tone, not tones of their own): ${t.harmonics.map((h) => `${h.k} × = ${formatHz(h.frequencyHz)}`).join(', ')}` }));
    }
    if (t.cycles.length) {
      // Medians across cycles need two: one cycle's own intervals say more.
      if (t.cycles.length >= 2) section.append(el('p', { className: 'cycle-medians', text: cycleMedianLine(t) }));
      section.append(
        scrollTable(
          i === 0 ? 'cycles-table' : `cycles-table-${i + 1}`,
          `Cycles of ${formatHz(t.frequencyHz)} (95 % intervals)`,
          CYCLE_COLUMNS,
          t.cycles.map(cycleCells),
          t.cycles.map((c) => ({ kind: c.isImpulseResponse ? 'ring-down' : 'cycle' })),
        ),
      );
    }
    box.append(section);
  });
  const steady = steadyLinesLine(rc);
  if (steady) box.append(el('p', { className: 'hint steady-lines', text: steady }));
  return box;
}

/**
 * The margin to humming from the noise (report.modeStatistics): each tone's linear growth rate ν
 * over each stretch of steady operation, its damping ratio when it decays, and the call of the
 * app's one rule (run/verdict.ts stabilityOf); a stretch the analysis could not call says why.
 */
export function modeStatisticsTable(report: Report): HTMLElement | null {
  const rows = report.modeStatistics ?? [];
  if (!rows.length) return null;
  return scrollTable(
    'mode-statistics-table',
    'Margin to humming from the noise (95 % intervals)',
    ['Frequency', 'Time (m:s)', 'Linear growth rate ν', 'Damping ratio', 'Call'],
    rows.map((m) => {
      const nu = m.linearGrowthRatePerS;
      const ci = m.linearGrowthRateCi95PerS;
      const isCalled = m.regime !== 'undetermined' && isShowable(nu);
      const zeta = isShowable(nu) && nu < 0 ? formatRatio(dampingRatioOf(-nu, m.frequencyHz), isShowableInterval(ci) ? [dampingRatioOf(-ci[1], m.frequencyHz), dampingRatioOf(-ci[0], m.frequencyHz)] : null) : formatMissing('not decaying');
      return [
        formatHz(m.frequencyHz),
        `${formatClock(m.startS)}–${formatClock(m.endS)}`,
        formatRate(nu, ci, 'not estimated'),
        zeta,
        isCalled ? STABILITY_WORDS[stabilityOf(nu, ci, m.frequencyHz)] : `not called${m.reason ? ` (${m.reason})` : ''}`,
      ];
    }),
    rows.map((m) => ({ call: m.regime !== 'undetermined' && isShowable(m.linearGrowthRatePerS) ? stabilityOf(m.linearGrowthRatePerS, m.linearGrowthRateCi95PerS, m.frequencyHz) : 'undetermined' })),
  );
}

/** The parts of a report's panel that do not depend on how it was run. */
export function renderReportParts(report: Report, title: string): HTMLElement[] {
  const out: HTMLElement[] = [
    el('h2', { text: title }),
    el('p', {
      text: `${formatSeconds(report.durationS)} at ${report.sampleRateHz} Hz · ${report.onsets.length} onset${report.onsets.length === 1 ? '' : 's'} · ${report.segments.length} segment${report.segments.length === 1 ? '' : 's'}`,
    }),
  ];
  const cycles = cyclesTable(report);
  if (cycles) out.push(cycles);
  const margins = modeStatisticsTable(report);
  if (margins) out.push(margins);
  out.push(segmentsTable(report));
  if (report.clipped?.length) {
    const spans = report.clipped.slice(0, 5).map((c) => `${formatClock(c.startS)}–${formatClock(c.endS)}`).join(', ');
    out.push(el('p', { className: 'alert clipped-note', text: `The input clipped (${spans}${report.clipped.length > 5 ? ', …' : ''}): levels there read low and rates fitted across it are unreliable. Move the phone further away.` }));
  }
  for (const n of report.noiseDriven) {
    out.push(el('p', { text: `Noise-excited resonance at ${formatHz(n.frequencyHz)} (${formatClock(n.startS)}–${formatClock(n.endS)}): decay rate ${formatRate(n.decayRatePerS, n.decayRateCi95PerS)}.` }));
  }
  if (report.warnings?.length) out.push(el('ul', { className: 'notes' }, ...report.warnings.map((w) => el('li', { text: w }))));
  return out;
}

/** The whole result panel of a run. */
export function renderRunResult(r: RunResult): HTMLElement[] {
  const out = renderReportParts(r.report, r.title);
  if (r.samplesAnalysed > 0 && r.report.sampleRateHz > 0) {
    // Cost of the analysis on this device: ms of computing per second of audio.
    const audioS = r.samplesAnalysed / r.report.sampleRateHz;
    const cost = el('p', {
      className: 'hint',
      id: 'analysis-cost',
      text: `Analysis took ${formatSeconds(r.analysisMs / 1000)} for ${formatSeconds(audioS)} of audio (${formatSeconds(r.analysisMs / 1000 / audioS)} per second of audio) on this device.`,
    });
    cost.dataset.analysisMs = String(r.analysisMs);
    cost.dataset.audioS = String(audioS);
    out.push(cost);
  }
  return out;
}
