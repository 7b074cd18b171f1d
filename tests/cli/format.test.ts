// Terminal output: derived figures and their intervals when the report's summary leaves them out.
// Check values: REFERENCES.md §5 worked example (f = 170 Hz observed, α = 5 1/s: ζ = 4.680976e-3,
// Q = 106.8153, T60 = 1.381551 s; s = +5 1/s: doubling time 0.1386294 s), relations from standard
// vibration texts (Rao, Mechanical Vibrations [from memory]); §6: effective gain β = s + α.
import { describe, expect, it } from 'vitest';
import { derivedFigures, groupByTone, num, renderSummary, renderTable, valueWithCi } from '../../dsp/cli/format';
import { REPORT_VERSION, type Report } from '../../dsp/types';

function bareReport(): Report {
  return {
    reportVersion: REPORT_VERSION,
    sampleRateHz: 8000,
    durationS: 10,
    onsets: [{ timeS: 2.41, frequencyHz: 170 }],
    segments: [
      { kind: 'quiet', startS: 0, endS: 2.41, frequencyHz: 170, ratePerS: null, rateCi95PerS: null },
      { kind: 'growth', startS: 2.41, endS: 4, frequencyHz: 170, ratePerS: 5, rateCi95PerS: [4.6, 5.4], model: 'stuart-landau' },
    ],
    noiseDriven: [],
    summary: { frequencyHz: 170, growthRatePerS: 5, decayRatePerS: 5, effectiveGainPerS: null, dampingRatio: null, qFactor: null, growthRateCi95PerS: [4.6, 5.4], decayRateCi95PerS: [4.7, 5.3] },
  };
}

const figure = (r: Report, label: string) => {
  const f = derivedFigures(r).find((d) => d.label.startsWith(label));
  if (!f) throw new Error(`no figure ${label}`);
  return f;
};

describe('derived figures', () => {
  it('match the worked example of REFERENCES.md §5 when the summary leaves them out', () => {
    const r = bareReport();
    expect(figure(r, 'damping ratio').value).toBeCloseTo(4.680976e-3, 8);
    expect(figure(r, 'Q').value).toBeCloseTo(106.8153, 3);
    expect(figure(r, 'T60').value).toBeCloseTo(1.381551, 6);
    expect(figure(r, 'doubling time').value).toBeCloseTo(0.1386294, 7);
    expect(figure(r, 'e-folding time').value).toBeCloseTo(0.2, 12);
    expect(figure(r, 'effective gain').value).toBeCloseTo(10, 12);
  });

  it('map intervals through monotone relations; the sum combines half-widths in quadrature', () => {
    const r = bareReport();
    const t60 = figure(r, 'T60').ci as [number, number];
    expect(t60[0]).toBeCloseTo((3 * Math.LN10) / 5.3, 12);
    expect(t60[1]).toBeCloseTo((3 * Math.LN10) / 4.7, 12);
    const gain = figure(r, 'effective gain').ci as [number, number];
    expect(gain[1] - 10).toBeCloseTo(Math.hypot(0.4, 0.3), 12);
    const q = figure(r, 'Q').ci as [number, number];
    expect(q[0]).toBeLessThan(106.8153);
    expect(q[1]).toBeGreaterThan(106.8153);
  });

  it('prefer the figures the report gives', () => {
    const r = bareReport();
    r.summary.dampingRatio = 0.01;
    r.summary.qFactor = 50;
    expect(figure(r, 'damping ratio').value).toBe(0.01);
    expect(figure(r, 'Q').value).toBe(50);
  });

  it('a decaying "growth" gives no e-folding or doubling time', () => {
    const r = bareReport();
    r.summary.growthRatePerS = -1;
    expect(figure(r, 'doubling time').value).toBeNull();
  });
});

describe('text', () => {
  it('numbers keep significant digits and show a dash when missing', () => {
    expect(num(106.8153, 4)).toBe('106.8');
    expect(num(0.004680976, 3)).toBe('0.00468');
    expect(num(null)).toBe('—');
    expect(num(Number.NaN)).toBe('—');
    expect(valueWithCi(8.1, '1/s', [7.6, 8.6], 2)).toBe('8.1 1/s  (95 % 7.6 to 8.6 1/s)');
  });

  it('tables align columns', () => {
    const t = renderTable(['a', 'bb'], [['1', '22'], ['333', '4']], [false, true]);
    expect(t.split('\n')).toEqual(['a    bb', '---  --', '1    22', '333   4', '']);
  });

  it('the summary names units and intervals and flags clipping', () => {
    const r = bareReport();
    r.clipped = [{ startS: 3, endS: 3.5 }];
    const text = renderSummary(r, { fileName: 'rig.wav', description: 'WAV PCM 16-bit' });
    expect(text).toContain('Onsets (1): 2.410 s (170.00 Hz)');
    expect(text).toMatch(/growth rate\s+5\.000\s+1\/s\s+\[4\.600, 5\.400\]/);
    expect(text).toMatch(/T60 \(decay\)\s+1\.382\s+s/);
    expect(text).toContain('CLIPPED: 1 stretch (0.500 s in all): 3.000–3.500 s');
  });

  it('segments go to the nearest tone, the main tone first', () => {
    const r = bareReport();
    r.tones = [
      { frequencyHz: 50, isSteadyLine: true },
      { frequencyHz: 170, isSteadyLine: false },
    ];
    r.segments.push({ kind: 'steady', startS: 0, endS: 10, frequencyHz: 50.02, ratePerS: 0, rateCi95PerS: [-0.01, 0.01] });
    const groups = groupByTone(r);
    expect(groups.map((g) => g.frequencyHz)).toEqual([170, 50]);
    expect(groups[0].segments.map((x) => x.kind)).toEqual(['quiet', 'growth']);
    expect(groups[0].onsets).toBe(1);
    expect(groups[1].segments.map((x) => x.kind)).toEqual(['steady']);
    const text = renderSummary(r, { fileName: 'rig.wav', description: 'WAV' });
    expect(text).toContain('Main tone 170.00 Hz: segments');
    expect(text).toMatch(/Other tones[^\n]*\n[^\n]*\n[^\n]*\n\s+50\.000\s+steady line\s+0\s+1/);
  });
});
