/**
 * The readable summary's block for the growth rate from noise (report.modeStatistics,
 * dsp/mode-statistics.ts): one row per tone and stretch of steady operation.
 */
import type { ModeStatistics, NoiseRegime, Report } from '../types';
import { interval, num, renderTable, timeS } from './format';

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
