import { describe, expect, it } from 'vitest';
import { finiteExtent, layoutLabels, safeRange } from '../../web/plot-safety';
import { niceTicks, svgLinePlot } from '../../web/storage/svg-plot';

// Plots must survive any data: constant, empty, non-finite and huge ranges all give a finite,
// non-empty, bounded axis, so tick generation stays short (the chart code once looped to 2.7 GB).
describe('axis ranges for any data', () => {
  const o = { fallback: [0, 1] as [number, number], minSpan: 1 };
  const isUsable = ([a, b]: [number, number]): boolean => Number.isFinite(a) && Number.isFinite(b) && b > a && b - a < 1e13;

  it('gives the fallback for empty or non-finite data', () => {
    expect(safeRange(null, null, o)).toEqual([0, 1]);
    expect(safeRange(Number.NaN, Number.POSITIVE_INFINITY, o)).toEqual([0, 1]);
    expect(safeRange(-1e308, 1e308, o)).toEqual([0, 1]);
  });

  it('widens constant data to the narrowest span, centred', () => {
    const [a, b] = safeRange(3700, 3700, { ...o, pad: 0 });
    expect([a, b]).toEqual([3699.5, 3700.5]);
  });

  it('keeps a dB axis within its widest span below the top (−300 dBFS silence does not squash it)', () => {
    const [a, b] = safeRange(-300, -6, { fallback: [-100, 0], minSpan: 6, maxSpan: 100, pad: 0 });
    expect([a, b]).toEqual([-106, -6]);
  });

  it('yields a short tick list for every case', () => {
    for (const [lo, hi] of [[0, 0], [5e-324, 5e-324], [-1e12, 1e12], [1, 1 + 1e-12], [Number.NaN, 2]] as const) {
      const r = safeRange(lo, hi, o);
      expect(isUsable(r)).toBe(true);
      expect(niceTicks(r[0], r[1], 6).length).toBeLessThan(20);
    }
  });

  it('finds the extent of the finite values only', () => {
    expect(finiteExtent([null, 3, Number.NaN, -2, 1e300])).toEqual([-2, 3]);
    expect(finiteExtent([]).every(Number.isNaN)).toBe(true);
  });
});

describe('marker labels never overprint', () => {
  it('puts a label that would touch its neighbour on the next row, and drops one that fits no row', () => {
    // Labels 50 px wide at 0, 20, 40, 200 px; gap 6 px; two rows.
    expect(layoutLabels([0, 20, 40, 200], [50, 50, 50, 50], 2, 6)).toEqual([0, 1, null, 0]);
  });

  it('lays out in position order whatever the given order', () => {
    expect(layoutLabels([200, 0], [50, 50], 1, 6)).toEqual([0, 0]);
    expect(layoutLabels([10, 0], [50, 50], 1, 6)).toEqual([null, 0]);
  });
});

describe('printable report plot', () => {
  it('clips the amplitude axis to the data, not to digital silence', () => {
    const x = Array.from({ length: 100 }, (_, i) => i / 10);
    const y = x.map((t) => (t < 5 ? -20 : -300));
    const svg = svgLinePlot({ title: 'amp', xLabel: 's', yLabel: 'dBFS', series: [{ x, y, label: 'tone', color: '#000' }], maxYSpan: 100 });
    expect(svg).not.toContain('>−300<');
    expect(svg).toContain('>−100<');
  });

  it('draws constant and huge data without hanging or printing non-numbers', () => {
    const flat = svgLinePlot({ title: 'flat', xLabel: 's', yLabel: 'Hz', series: [{ x: [0, 1, 2], y: [3700, 3700, 3700], label: 'f', color: '#000' }] });
    expect(flat).not.toMatch(/NaN|Infinity/);
    const huge = svgLinePlot({ title: 'huge', xLabel: 's', yLabel: 'Hz', series: [{ x: [0, 1, 2], y: [1e308, -1e308, 5], label: 'f', color: '#000' }] });
    expect(huge).not.toMatch(/NaN|Infinity/);
  });
});
