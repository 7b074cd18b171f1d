/**
 * The live margin to humming: the linear growth rate ν from the noise (dsp/live-margin.ts, sent by
 * the worker in each update's `margin`) as a line of text with its 95 % interval, and a small
 * strip of the interval against zero for each estimate so far, so the technician sees it narrow as
 * data comes in (and move towards zero while turning up the firing rate). Self-contained: give it
 * a host and the latest margin; it draws only when the margin changes.
 */
import { formatQuantity, formatRate } from '../format';
import type { MarginEstimate } from '../worker/protocol';
import { el } from './dom';
import { STABILITY_WORDS, stabilityOf } from '../run/verdict';
import { svg } from './session-dom';

/** Estimates kept in the strip. */
const HISTORY = 30;
const WIDTH = 320;
const HEIGHT = 64;

/**
 * Both trends above this are called rising: with no trend, Kendall's τ over n windows has sd
 * √(2(2n+5)/(9n(n−1))) (Kendall 1938), 0.15 for the 23 windows of a full minute, so 0.5 is over 3 sd.
 */
const RISING_TAU = 0.5;

/** The margin as the worker sends it, with the early-warning trends when present (dsp/live-margin.ts). */
type MarginWithTrends = MarginEstimate & { varianceTrend?: number; autocorrelationTrend?: number };

function trendText(m: MarginWithTrends): string {
  const v = m.varianceTrend;
  const a = m.autocorrelationTrend;
  if (v === undefined || a === undefined || !Number.isFinite(v) || !Number.isFinite(a)) return 'Early-warning trend: not enough steady operation yet.';
  const rising = v > RISING_TAU && a > RISING_TAU;
  return `Early-warning trend (Kendall τ, −1 to +1): envelope variance ${v.toFixed(2)}, autocorrelation ${a.toFixed(2)}${rising ? ' — both rising: the damping is falling' : ''}.`;
}

export interface LiveMarginView {
  update(margin: MarginWithTrends | null): void;
  reset(): void;
}

export function createLiveMarginView(host: HTMLElement): LiveMarginView {
  const text = el('p', { className: 'live-margin-text', attrs: { 'aria-live': 'polite' } });
  const trend = el('p', { className: 'live-margin-trend hint' });
  const chart = svg('svg', { viewBox: `0 0 ${WIDTH} ${HEIGHT}`, class: 'live-margin-strip', role: 'img', 'aria-label': 'linear growth rate from the noise, 95 % interval of each estimate' });
  const box = el('div', { className: 'live-margin', hidden: true }, el('h3', { text: 'Margin to humming (from the noise)' }), text, chart, trend);
  host.append(box);
  const history: MarginEstimate[] = [];
  let latest: MarginEstimate | null = null;

  function draw(): void {
    chart.replaceChildren();
    const lo = Math.min(0, ...history.map((m) => m.growthRateCi95PerS[0]));
    const hi = Math.max(0, ...history.map((m) => m.growthRateCi95PerS[1]));
    const pad = 0.05 * (hi - lo || 1);
    const x = (v: number): number => 8 + ((v - lo + pad) / (hi - lo + 2 * pad)) * (WIDTH - 16);
    chart.append(svg('line', { x1: x(0), x2: x(0), y1: 0, y2: HEIGHT - 12, stroke: 'currentColor', 'stroke-dasharray': '3 3' }));
    // The label sits on the side of the zero line with room for it, so it never runs past the strip.
    const isLabelLeft = x(0) > WIDTH / 2;
    chart.append(svg('text', { x: isLabelLeft ? x(0) - 3 : x(0) + 3, y: HEIGHT - 2, 'font-size': 10, fill: 'currentColor', 'text-anchor': isLabelLeft ? 'end' : 'start' }, 'ν = 0 (threshold)'));
    const rowH = (HEIGHT - 14) / HISTORY;
    history.forEach((m, i) => {
      const y = 2 + (HISTORY - history.length + i) * rowH + rowH / 2;
      const call = stabilityOf(m.growthRatePerS, m.growthRateCi95PerS, m.frequencyHz);
      const colour = call === 'humming' ? 'var(--plot-growth, #c2410c)' : call === 'stable' ? 'var(--plot-decay, #047857)' : 'var(--muted, #555)';
      chart.append(svg('line', { x1: x(m.growthRateCi95PerS[0]), x2: x(m.growthRateCi95PerS[1]), y1: y, y2: y, stroke: colour, 'stroke-width': Math.max(1, rowH - 1) }));
    });
  }

  return {
    update(margin) {
      if (margin === null || margin === latest || !Number.isFinite(margin.growthRatePerS)) return;
      latest = margin;
      if (!Number.isFinite(margin.growthRateCi95PerS[0]) || !Number.isFinite(margin.growthRateCi95PerS[1])) return;
      history.push(margin);
      if (history.length > HISTORY) history.shift();
      const word = STABILITY_WORDS[stabilityOf(margin.growthRatePerS, margin.growthRateCi95PerS, margin.frequencyHz)];
      const span = formatQuantity(margin.endS - margin.startS, 's', null, { decimals: 0 });
      text.textContent = `linear growth rate (from noise) ${formatRate(margin.growthRatePerS, margin.growthRateCi95PerS)} at ${formatQuantity(margin.frequencyHz, 'Hz', null, { decimals: 1 })}: ${word}; ${span} of steady operation`;
      trend.textContent = trendText(margin);
      box.hidden = false;
      draw();
    },
    reset() {
      history.length = 0;
      latest = null;
      box.hidden = true;
      chart.replaceChildren();
    },
  };
}
