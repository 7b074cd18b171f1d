/**
 * Terminal output of the command line: aligned text tables and numbers with their unit and 95 %
 * interval. The report's summary carries the derived figures (dsp/derived.ts); when one is
 * missing it is derived here by the same relations (REFERENCES.md §5–6, standard vibration texts,
 * e.g. Rao, Mechanical Vibrations): damping ratio ζ = α/ωn, Q = 1/(2ζ), T60 = 3 ln 10 / α,
 * e-folding time 1/s, doubling time ln 2 / s, effective gain β = s + α.
 */

import { dampingRatio } from '../derived';
import { paFromSplDb } from '../levels';
import type { Interval, ModeStatistics, NoiseRegime, Report, Segment } from '../types';
import { groupByTone } from '../final-states';

export { groupByTone };

/** A table: header row and body rows of cells; `alignRight` per column. */
export function renderTable(header: string[], rows: string[][], alignRight: boolean[] = []): string {
  const widths = header.map((h, c) => Math.max(width(h), ...rows.map((r) => width(r[c] ?? ''))));
  const line = (cells: string[]): string =>
    cells
      .map((cell, c) => (alignRight[c] ? ' '.repeat(widths[c] - width(cell)) + cell : cell + ' '.repeat(widths[c] - width(cell))))
      .join('  ')
      .trimEnd();
  const rule = widths.map((w) => '-'.repeat(w)).join('  ');
  return [line(header), rule, ...rows.map(line)].join('\n') + '\n';
}

/** Display width (code points; the units used here are all narrow). */
function width(s: string): number {
  return [...s].length;
}

/** A number to `sig` significant digits, without exponent for everyday magnitudes. */
export function num(x: number | null | undefined, sig = 4): string {
  if (x === null || x === undefined || !Number.isFinite(x)) return '—';
  if (x === 0) return '0';
  const a = Math.abs(x);
  if (a >= 1e-4 && a < 1e7) {
    const decimals = Math.max(0, sig - 1 - Math.floor(Math.log10(a)));
    return x.toFixed(Math.min(decimals, 10));
  }
  return x.toExponential(sig - 1);
}

/** "[low, high]" with the same precision as the value. */
export function interval(ci: Interval | null | undefined, sig = 4): string {
  if (!ci || !Number.isFinite(ci[0]) || !Number.isFinite(ci[1])) return '—';
  return `[${num(ci[0], sig)}, ${num(ci[1], sig)}]`;
}

/** "8.100 1/s (95 % 7.600 to 8.600)"; unit '' for dimensionless figures. */
export function valueWithCi(x: number | null | undefined, unit: string, ci?: Interval | null, sig = 4): string {
  if (x === null || x === undefined || !Number.isFinite(x)) return 'not measured';
  const u = unit ? ` ${unit}` : '';
  const c = ci && Number.isFinite(ci[0]) && Number.isFinite(ci[1]) ? `  (95 % ${num(ci[0], sig)} to ${num(ci[1], sig)}${u})` : '';
  return `${num(x, sig)}${u}${c}`;
}

/** Time in s with millisecond resolution. */
export function timeS(x: number): string {
  return Number.isFinite(x) ? x.toFixed(3) : '—';
}

/** A figure derived from the report, with its 95 % interval when one follows from the fitted ones. */
export interface DerivedFigure {
  label: string;
  value: number | null;
  unit: string;
  ci: Interval | null;
  note?: string;
}

/** Interval of 1/x from the interval of x (monotone map, valid when x's interval excludes 0). */
function inverseCi(ci: Interval | null | undefined, k: number): Interval | null {
  if (!ci || !(ci[0] > 0) || !(ci[1] > 0)) return null;
  return [k / ci[1], k / ci[0]];
}

/**
 * Derived figures of the main tone. Intervals of monotone functions of one fitted rate map through
 * the function; the effective gain (sum of two independent fits) combines the half-widths in
 * quadrature (normal approximation) when the report gives no interval of its own.
 */
export function derivedFigures(report: Report): DerivedFigure[] {
  const s = report.summary;
  const f = s.frequencyHz;
  const g = s.growthRatePerS;
  const a = s.decayRatePerS;
  const gCi = s.growthRateCi95PerS ?? null;
  const aCi = s.decayRateCi95PerS ?? null;
  let gainCi = s.effectiveGainCi95PerS ?? null;
  if (!gainCi && gCi && aCi && g !== null && a !== null) {
    const h = Math.hypot((gCi[1] - gCi[0]) / 2, (aCi[1] - aCi[0]) / 2);
    gainCi = [g + a - h, g + a + h];
  }
  const gain = s.effectiveGainPerS ?? (g !== null && a !== null ? g + a : null);
  const zeta = s.dampingRatio ?? (a !== null && f ? dampingRatio(a, f) : null);
  const zetaCi = s.dampingRatioCi95 ?? (f && aCi ? ([dampingRatio(aCi[0], f), dampingRatio(aCi[1], f)] as Interval) : null);
  const q = s.qFactor ?? (zeta ? 1 / (2 * zeta) : null);
  const qCi = s.qFactorCi95 ?? inverseCi(zetaCi, 0.5);
  const growthPositive = g !== null && g > 0;
  return [
    { label: 'frequency', value: f, unit: 'Hz', ci: null },
    { label: 'growth rate', value: g, unit: '1/s', ci: gCi, note: g !== null ? num(g * 20 * Math.LOG10E, 3) : undefined },
    { label: 'decay rate', value: a, unit: '1/s', ci: aCi, note: a !== null ? num(a * 20 * Math.LOG10E, 3) : undefined },
    { label: 'effective gain (growth + decay)', value: gain, unit: '1/s', ci: gainCi },
    { label: 'damping ratio', value: zeta, unit: '', ci: zetaCi },
    { label: 'Q', value: q, unit: '', ci: qCi },
    { label: 'e-folding time (growth)', value: s.eFoldingTimeS ?? (growthPositive ? 1 / (g as number) : null), unit: 's', ci: inverseCi(gCi, 1) },
    { label: 'doubling time', value: s.doublingTimeS ?? (growthPositive ? Math.LN2 / (g as number) : null), unit: 's', ci: inverseCi(gCi, Math.LN2) },
    { label: 'T60 (decay)', value: s.t60S ?? (a !== null && a > 0 ? (3 * Math.LN10) / a : null), unit: 's', ci: inverseCi(aCi, 3 * Math.LN10) },
  ];
}

/**
 * A rate in 1/s with 3 significant digits but never more than 3 decimals, so a near-zero drift
 * reads 0.000 rather than 7.17e-5 (its interval shows what it is worth).
 */
export function rateText(x: number | null | undefined): string {
  if (x === null || x === undefined || !Number.isFinite(x)) return '—';
  const a = Math.abs(x);
  if (a >= 1e7) return num(x, 3);
  const decimals = a === 0 ? 3 : Math.min(3, Math.max(0, 2 - Math.floor(Math.log10(a))));
  const t = x.toFixed(decimals);
  return /^-0\.?0*$/.test(t) ? t.slice(1) : t;
}

/**
 * The one sign convention of the text output: a growth rate s and a decay rate α are both
 * positive (amplitude ∝ e^(+s·t) while growing, e^(−α·t) while decaying), as in the report's
 * summary; a steady segment shows its residual drift, signed (+ grows, − decays). The report's
 * segments carry the signed e-folding rate, so a decay's is negated here.
 */
export function displayedRate(seg: Pick<Segment, 'kind' | 'ratePerS' | 'rateCi95PerS'>): { rate: number | null; ci: Interval | null } {
  if (seg.ratePerS === null) return { rate: null, ci: null };
  if (seg.kind !== 'decay') return { rate: seg.ratePerS, ci: seg.rateCi95PerS ?? null };
  const ci = seg.rateCi95PerS;
  return { rate: -seg.ratePerS, ci: ci ? [-ci[1], -ci[0]] : null };
}

/** Rows of the segment table. */
export function segmentRows(segments: Segment[]): string[][] {
  return segments.map((seg) => {
    const { rate, ci } = displayedRate(seg);
    const sign = seg.kind === 'steady' && rate !== null && /[1-9]/.test(rateText(rate)) && rate > 0 ? '+' : '';
    return [
      seg.kind,
      timeS(seg.startS),
      timeS(seg.endS),
      num(seg.frequencyHz, 5),
      rate === null ? '—' : sign + rateText(rate),
      ci ? `[${rateText(ci[0])}, ${rateText(ci[1])}]` : '—',
      seg.model ?? '',
    ];
  });
}


/** What the rate columns mean (one convention for every table of the text output). */
export const RATE_NOTE = '* growth and decay rates both positive: amplitude ∝ e^(+rate·t) growing, e^(−rate·t) decaying;\n  steady: the drift left (+ grows, − decays)\n';

/** Rows of the segment table and warning lines shown before pointing to --json. */
const MAX_SEGMENT_ROWS = 60;
const MAX_WARNINGS = 8;

/** Facts about the input file shown above the analysis. */
export interface InputFacts {
  fileName: string;
  description: string;
  /** dB added to a dBFS level to give dB SPL, when the input is calibrated in pascals. */
  splOffsetDb?: number;
}

/** The readable summary of one analysis. */
export function renderSummary(report: Report, input: InputFacts): string {
  const out: string[] = [];
  out.push(`${input.fileName}: ${input.description}, ${num(report.durationS, 4)} s analysed`);
  if (input.splOffsetDb !== undefined) {
    const o = input.splOffsetDb;
    out.push(`levels: dB SPL = dBFS ${o < 0 ? '−' : '+'} ${num(Math.abs(o), 4)} dB (pressure values in Pa, re 20 µPa)`);
  }
  out.push('');
  const groups = groupByTone(report);
  const main = groups[0];
  if (!main) out.push('Tones: none found');
  if (report.onsets.length === 0) out.push('Onsets: none');
  else {
    const shown = report.onsets.slice(0, 20).map((o) => `${timeS(o.timeS)} s (${num(o.frequencyHz, 5)} Hz)`);
    const more = report.onsets.length > 20 ? `, … ${report.onsets.length - 20} more (see --json)` : '';
    out.push(`Onsets (${report.onsets.length}): ${shown.join(', ')}${more}`);
  }
  out.push('');
  if (main) {
    const shown = main.segments.slice(0, MAX_SEGMENT_ROWS);
    const more = main.segments.length > shown.length ? ` (first ${shown.length} of ${main.segments.length}; all in --json)` : '';
    out.push(`Main tone ${num(main.frequencyHz, 5)} Hz${main.isSteadyLine ? ' (steady line)' : ''}: segments${more}`);
    out.push(
      main.segments.length > 0
        ? renderTable(
            ['state', 'start s', 'end s', 'frequency Hz', 'rate 1/s *', '95 % interval 1/s', 'model'],
            segmentRows(shown),
            [false, true, true, true, true, false, false],
          )
        : 'none\n',
    );
    if (main.segments.length > 0) out.push(RATE_NOTE);
  }
  if (groups.length > 1) {
    out.push('Other tones (first growth and decay of each; all segments in --json)');
    out.push(
      renderTable(
        ['frequency Hz', 'kind', 'onsets', 'segments', 'growth 1/s', '95 % interval', 'decay 1/s', '95 % interval'],
        groups.slice(1).map((g) => {
          const grow = g.segments.find((x) => x.kind === 'growth' && x.ratePerS !== null);
          const dec = g.segments.find((x) => x.kind === 'decay' && x.ratePerS !== null);
          return [
            num(g.frequencyHz, 5),
            g.isSteadyLine ? 'steady line' : 'tone',
            String(g.onsets),
            String(g.segments.length),
            grow ? rateText(grow.ratePerS) : '—',
            interval(grow?.rateCi95PerS, 3),
            dec && dec.ratePerS !== null ? rateText(-dec.ratePerS) : '—',
            dec?.rateCi95PerS ? interval([-dec.rateCi95PerS[1], -dec.rateCi95PerS[0]], 3) : '—',
          ];
        }),
        [true, false, true, true, true, false, true, false],
      ),
    );
  }
  if (report.noiseDriven.length > 0) {
    out.push('Noise-driven resonance (damping of a quiet mode)');
    out.push(
      renderTable(
        ['start s', 'end s', 'frequency Hz', 'decay rate 1/s', '95 % interval 1/s'],
        report.noiseDriven.map((n) => [timeS(n.startS), timeS(n.endS), num(n.frequencyHz, 5), num(n.decayRatePerS, 3), interval(n.decayRateCi95PerS, 3)]),
        [true, true, true, true, false],
      ),
    );
  }
  out.push(...modeStatisticsLines(report));
  const figures = derivedFigures(report);
  out.push('Main tone');
  out.push(
    renderTable(
      ['figure', 'value', 'unit', '95 % interval', 'in dB/s'],
      figures.map((d) => [d.label, num(d.value, 4), d.value === null ? '' : d.unit || '(ratio)', interval(d.ci, 4), d.note ?? '']),
      [false, true, false, false, false],
    ),
  );
  if (report.summary.limitAmplitudeDbfs !== undefined && report.summary.limitAmplitudeDbfs !== null) {
    const lp = input.splOffsetDb !== undefined ? report.summary.limitAmplitudeDbfs + input.splOffsetDb : null;
    const spl = lp !== null ? ` (${num(paFromSplDb(lp), 4)} Pa RMS, ${num(lp, 4)} dB SPL)` : '';
    out.push(`limit-cycle amplitude: ${num(report.summary.limitAmplitudeDbfs, 4)} dBFS${spl}`);
  }
  const clipped = report.clipped ?? [];
  if (clipped.length > 0) {
    const total = clipped.reduce((t, c) => t + (c.endS - c.startS), 0);
    const list = clipped.slice(0, 10).map((c) => `${timeS(c.startS)}–${timeS(c.endS)} s`);
    out.push(
      `CLIPPED: ${clipped.length} stretch${clipped.length === 1 ? '' : 'es'} (${num(total, 3)} s in all): ${list.join(', ')}${clipped.length > 10 ? ', …' : ''}; levels and rates there are unreliable`,
    );
  }
  const warnings = report.warnings ?? [];
  for (const w of warnings.slice(0, MAX_WARNINGS)) out.push(`warning: ${w}`);
  if (warnings.length > MAX_WARNINGS) out.push(`… ${warnings.length - MAX_WARNINGS} more warnings (see --json)`);
  return out.join('\n').replace(/\n{3,}/g, '\n\n').trimEnd() + '\n';
}

/* The readable summary's block for the growth rate from noise (report.modeStatistics, dsp/mode-statistics.ts): one row per tone and stretch of steady operation. */

const REGIME_WORDS: Record<NoiseRegime, string> = {
  stable: 'stable',
  'near-threshold': 'near threshold',
  humming: 'humming',
  undetermined: 'cannot tell',
};

function regimeText(m: ModeStatistics): string {
  return m.reason !== undefined ? `${REGIME_WORDS[m.regime]}: ${m.reason}` : REGIME_WORDS[m.regime];
}

/** Lines for the summary; none when the report holds no entry. */
export function modeStatisticsLines(report: Report): string[] {
  const rows = report.modeStatistics ?? [];
  if (rows.length === 0) return [];
  return [
    'Linear growth rate (from noise): negative = stable (its size is the net damping), positive = humming',
    renderTable(
      ['start s', 'end s', 'frequency Hz', 'linear growth rate (from noise) 1/s', '95 % interval 1/s', 'regime'],
      rows.map((m) => [timeS(m.startS), timeS(m.endS), num(m.frequencyHz, 5), num(m.linearGrowthRatePerS, 3), interval(m.linearGrowthRateCi95PerS, 3), regimeText(m)]),
      [true, true, true, true, false, false],
    ),
  ];
}
