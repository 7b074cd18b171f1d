import { describe, expect, it } from 'vitest';
import { createTimeWeightedLevel, stepTimeWeightedLevel, TIME_CONSTANT_S, weightedLevelDb } from '../../web/run/time-weighting';
import { classifyMargin, dampingRatioOf, formatQuietMargin, NEAR_THRESHOLD_DAMPING_RATIO, quietMargin, ringDownMargin, STABILITY_WORDS, stabilityOf, verdictOf } from '../../web/run/verdict';
import { regimeFromInterval } from '../../dsp/mode-statistics';
import { paFromSplDb, sensorOffsetDb } from '../../web/run/sensor';
import { cycledTones, cyclesOf, MAD_TO_SD, medianAndSpread, steadyLinesLine, VERSION_1_MISSING } from '../../web/run/cycles';
import { cycleCells } from '../../web/run/cycles';
import { emptyLiveSummary } from '../../web/worker/live-summary';
import { formatPa, formatQ, formatRatio } from '../../web/format';
import { splitInterval } from '../../web/views/live-readouts';
import type { Cycle, ModeStatistics, NoiseDriven, Report, Segment, Summary } from '../../dsp/types';
import { beforeAfterSentences, formatChange, rateChange } from '../../web/run/compare';
import { checkReanalysis, octaveAround } from '../../web/run/reanalyse';

describe('level time weighting (IEC 61672-1:2013 §5.8, REFERENCES.md §90)', () => {
  it('uses the standard time constants, F 0.125 s and S 1 s', () => {
    // IEC 61672-1:2013 §5.8: F 0.125 s, S 1 s.
    expect(TIME_CONSTANT_S.fast).toBe(0.125);
    expect(TIME_CONSTANT_S.slow).toBe(1);
  });

  it('rises to 1 − 1/e of a step in one time constant, whatever the row spacing', () => {
    // Exponential averaging, definition in IEC 61672-1 §3.9 / §5.8: y(τ) = 1 − e^{−1} for a unit step from zero.
    for (const dt of [0.01, 0.037, 0.1]) {
      const w = createTimeWeightedLevel('slow');
      stepTimeWeightedLevel(w, 0, 0);
      for (let t = dt; t <= 1 + 1e-9; t += dt) stepTimeWeightedLevel(w, t, 1);
      const steps = Math.floor((1 + 1e-9) / dt);
      const reached = 1 - Math.exp(-(steps * dt));
      expect(w.meanSquare).toBeCloseTo(reached, 10);
      expect(Math.abs(w.meanSquare - (1 - Math.exp(-1)))).toBeLessThan(1 - Math.exp(-dt) + 1e-9);
    }
  });

  it('falls at 34.7 dB/s (F) and 4.3 dB/s (S) after the sound stops', () => {
    // IEC 61672-1:2013 §5.8.3 decay rates for F and S; also 10·lg(e)/τ.
    for (const [weighting, rateDbPerS] of [['fast', 34.7], ['slow', 4.3]] as const) {
      const w = createTimeWeightedLevel(weighting);
      stepTimeWeightedLevel(w, 0, 1);
      const t = 0.5;
      stepTimeWeightedLevel(w, t, 1e-12);
      const fall = -weightedLevelDb(w) / t;
      expect(Math.abs(fall - rateDbPerS)).toBeLessThan(0.05);
    }
  });

  it('shows a steady tone steady: a 46 Hz tone sampled in 10 ms mean squares reads within 0.2 dB of its level', () => {
    // A sine's mean square over windows shorter than its period swings between 0 and twice its mean
    // (here ±5 dB); the slow weighting over 1 s of rows averages it (common practice).
    const w = createTimeWeightedLevel('slow');
    const dt = 0.01;
    const f = 46;
    const readings: number[] = [];
    for (let k = 0; k < 600; k++) {
      const t0 = k * dt;
      // Exact mean square of sin² over [t0, t0 + dt].
      const ms = 0.5 - (Math.sin(4 * Math.PI * f * (t0 + dt)) - Math.sin(4 * Math.PI * f * t0)) / (8 * Math.PI * f * dt);
      stepTimeWeightedLevel(w, t0 + dt, 2 * ms);
      if (t0 > 3) readings.push(weightedLevelDb(w));
    }
    expect(Math.max(...readings) - Math.min(...readings)).toBeLessThan(0.4);
    for (const r of readings) expect(Math.abs(r)).toBeLessThan(0.2);
  });

  it('skips non-finite rows and restarts when time runs backwards', () => {
    const w = createTimeWeightedLevel('fast');
    stepTimeWeightedLevel(w, 1, Number.NaN);
    expect(Number.isNaN(weightedLevelDb(w))).toBe(true);
    stepTimeWeightedLevel(w, 1, 0.01);
    stepTimeWeightedLevel(w, 0.5, 1);
    expect(weightedLevelDb(w)).toBeCloseTo(0, 12);
  });
});

describe('verdict at a glance (REFERENCES.md §5, §6, §92)', () => {
  const quiet = (): ReturnType<typeof emptyLiveSummary> => emptyLiveSummary();

  it('damping ratio of the §5 worked example: α 5 1/s at 170 Hz gives ζ 4.681e-3', () => {
    // REFERENCES.md §5 worked example: zeta = alpha/wd = 4.681027e-3.
    expect(dampingRatioOf(5, 170)).toBeCloseTo(4.681027e-3, 8);
  });

  it('calls a quiet mode with ζ over the threshold stable and prints its decay rate and damping ratio', () => {
    // A stable tube mode: heated-tube model at a quarter of critical power decays at about 14 1/s at 174 Hz (ζ 0.0129).
    const m = { growthRatePerS: -14.1, ci95PerS: [-16, -12.2] as [number, number], frequencyHz: 174.4, basis: 'test' };
    expect(classifyMargin(m)).toBe('stable');
    expect(formatQuietMargin(m)).toBe('decay rate 14.1 1/s (95 % CI 12.2–16.0) · damping ratio 0.0129 (95 % CI 0.0111–0.0146)');
  });

  it('calls a mode near threshold below ζ = 0.5 % or when its interval reaches zero', () => {
    // ζ = 2/(2π·174.4) = 1.8e-3 < 0.005 (REFERENCES.md §92); σ interval [−3, +0.5] cannot be told from threshold.
    expect(NEAR_THRESHOLD_DAMPING_RATIO).toBe(0.005);
    expect(classifyMargin({ growthRatePerS: -2, ci95PerS: [-2.5, -1.5], frequencyHz: 174.4, basis: '' })).toBe('near-threshold');
    expect(classifyMargin({ growthRatePerS: -20, ci95PerS: [-40, 0.5], frequencyHz: 174.4, basis: '' })).toBe('near-threshold');
    expect(classifyMargin({ growthRatePerS: 1, ci95PerS: [0.5, 1.5], frequencyHz: 174.4, basis: '' })).toBe('humming');
  });

  it('takes the margin of a knocked duct from its least-damped ring-down (REFERENCES.md §6), with no onset', () => {
    // 140 Hz at 6 1/s: ζ = 6/(2π·140) = 0.00682; 291 Hz at 15 1/s: ζ = 0.0082. The first sets the margin.
    const ring = (f: number, rate: number): Segment => ({ kind: 'decay', startS: 3, endS: 4, frequencyHz: f, ratePerS: -rate, rateCi95PerS: [-rate - 0.1, -rate + 0.1], isImpulseResponse: true });
    const m = ringDownMargin([ring(291, 15), ring(140, 6), { ...ring(500, 1), isImpulseResponse: false }]);
    expect(m?.frequencyHz).toBe(140);
    const v = verdictOf({ summary: emptyLiveSummary(), segments: [ring(291, 15), ring(140, 6)], isFinal: true });
    expect(v.kind).toBe('stable');
    expect(v.margin).toBe('decay rate 6.00 1/s (95 % CI 5.90–6.10) · damping ratio 0.00682 (95 % CI 0.00671–0.00693)');
  });

  it('makes one call for the live verdict, the live margin and the report: the sign the interval allows (§42), then ζ (§92)', () => {
    // Where ζ is large the app's call is the noise statistics' regime of REFERENCES.md §42 exactly.
    for (const ci of [[-9, -3], [-9, 2], [1, 4], [-4, 0]] as [number, number][]) {
      const nu = (ci[0] + ci[1]) / 2;
      expect(stabilityOf(nu, ci, 50)).toBe(regimeFromInterval(ci));
    }
    // A stretch the §42 rule calls stable is near threshold under ζ = 0.005: 3 1/s at 174.4 Hz is ζ = 0.0027.
    expect(regimeFromInterval([-3.5, -2.5])).toBe('stable');
    expect(stabilityOf(-3, [-3.5, -2.5], 174.4)).toBe('near-threshold');
    expect(STABILITY_WORDS[stabilityOf(-3, [-3.5, -2.5], 174.4)]).toBe('near threshold');
  });

  it('takes the least-damped noise-excited resonance as the margin, not the loudest or the first', () => {
    // The margin of a system is that of its least stable mode (REFERENCES.md §6): 176 Hz at 5 1/s
    // (ζ 0.0045) beats 343 Hz at 61 1/s (ζ 0.028), the case the field test met at 44.1 kHz.
    const nd = (f: number, a: number): NoiseDriven => ({ startS: 0, endS: 10, frequencyHz: f, decayRatePerS: a, decayRateCi95PerS: [a * 0.8, a * 1.2] });
    const m = quietMargin(null, [nd(343, 61), nd(176, 5)]);
    expect(m?.frequencyHz).toBe(176);
    expect(m?.growthRatePerS).toBe(-5);
    expect(m?.ci95PerS).toEqual([-6, -4]);
  });

  it('takes the largest linear growth rate of the report’s noise statistics before the noise-excited decay', () => {
    // ν of the normal form du = (ν − κ|u|²)u dt + σ dW (report.modeStatistics): the stretch closest to humming sets the margin.
    const stat = (nu: number): ModeStatistics => ({ frequencyHz: 177, startS: 0, endS: 20, linearGrowthRatePerS: nu, linearGrowthRateCi95PerS: [nu - 0.5, nu + 0.5], saturation: null, noiseIntensity: null, regime: 'stable', method: 'amplitude-pdf' });
    const nd: NoiseDriven = { startS: 0, endS: 20, frequencyHz: 177, decayRatePerS: 9, decayRateCi95PerS: [8, 10] };
    const m = quietMargin(null, [nd], [stat(-6), stat(-1.6)]);
    expect(m?.growthRatePerS).toBe(-1.6);
    expect(m?.basis).toContain('amplitude-pdf');
    expect(classifyMargin(m as NonNullable<typeof m>)).toBe('near-threshold');
  });

  it('prefers the live margin when the analysis gives one', () => {
    const live = { frequencyHz: 171, growthRatePerS: -3, growthRateCi95PerS: [-4, -2] as [number, number], method: 'from the noise', startS: 0, endS: 5 };
    const v = verdictOf({ summary: quiet(), margin: live });
    expect(v.kind).toBe('near-threshold');
    expect(v.basis).toBe('from the noise');
  });

  it('never says Quiet while a tone is tracked, and keeps humming while the tone grows or holds', () => {
    const s = quiet();
    s.latestFrequencyHz = 46;
    expect(verdictOf({ summary: s }).regimeWord).toBe('Tone present');
    s.regime = 'steady';
    s.growthRatePerS = 7;
    s.growthRateCi95PerS = [6.5, 7.5];
    const v = verdictOf({ summary: s });
    expect(v.kind).toBe('humming');
    expect(v.margin).toBe('growth rate 7.00 1/s (95 % CI 6.50–7.50)');
  });

  it('a finished record that hummed and stopped says both', () => {
    const s = quiet();
    s.growthRatePerS = 7;
    s.decayRatePerS = 4.5;
    const v = verdictOf({ summary: s, isFinal: true });
    expect(v.headline).toBe('Hummed, then stopped');
    expect(v.margin).toContain('decay rate 4.50 1/s');
  });
});

describe('pressure-sensor data in Pa (REFERENCES.md §11)', () => {
  it('a full-scale sine at √2 Pa per full scale is 1 Pa rms = 93.98 dB SPL', () => {
    // L_p = 20·lg(1 Pa / 20 µPa) = 93.979 dB (definition, IEC 61672-1 reference 20 µPa).
    expect(sensorOffsetDb(Math.SQRT2)).toBeCloseTo(93.9794, 4);
  });

  it('94 dB SPL is 1.002374 Pa rms (REFERENCES.md test vector 35)', () => {
    expect(paFromSplDb(94)).toBeCloseTo(1.002374, 6);
  });

  it('formats pressures with their unit', () => {
    expect(formatPa(0.0421)).toBe('42.1 mPa');
    expect(formatPa(3.2)).toBe('3.20 Pa');
    expect(formatPa(2500)).toBe('2.50 kPa');
    expect(formatPa(Number.NaN)).toBe('— (no signal)');
  });

});

describe('per-cycle table', () => {
  const seg = (kind: Segment['kind'], startS: number, endS: number, ratePerS: number | null, frequencyHz = 171): Segment => ({
    kind,
    startS,
    endS,
    frequencyHz,
    ratePerS,
    rateCi95PerS: ratePerS === null ? null : [ratePerS - 0.5, ratePerS + 0.5],
  });
  const report = (segments: Segment[]): Report => ({ reportVersion: 1, sampleRateHz: 48000, durationS: 60, onsets: [], segments, noiseDriven: [], summary: { frequencyHz: 171, growthRatePerS: null, decayRatePerS: null, effectiveGainPerS: null, dampingRatio: null, qFactor: null } });

  it('rebuilds a version-1 report: one cycle per rise, with the decay that ends it (decay shown as a positive rate)', () => {
    const rc = cyclesOf(report([seg('quiet', 0, 2, null), seg('growth', 2, 3, 7), seg('steady', 3, 8, null), seg('decay', 8, 9, -4.5), seg('quiet', 9, 20, null), seg('growth', 20, 21, 6), seg('decay', 25, 26, -5)]));
    expect(rc.tones.length).toBe(1);
    const rows = rc.tones[0]!.cycles;
    expect(rows.length).toBe(2);
    expect(rows[0]).toMatchObject({ startS: 2, endS: 9, growthRatePerS: 7, decayRatePerS: 4.5, decayRateCi95PerS: [4, 5], onsetS: null });
    expect(rows[1]).toMatchObject({ startS: 20, endS: 26, growthRatePerS: 6, decayRatePerS: 5 });
    // What version 1 cannot tell is said, not left blank.
    expect(rc.missing).toEqual(VERSION_1_MISSING);
  });

  it('keeps the cycles of two tones of a version-1 report apart', () => {
    const rc = cyclesOf(report([seg('growth', 1, 2, 7, 171), seg('growth', 1.5, 2.5, 9, 343), seg('decay', 5, 6, -4, 171), seg('decay', 5.5, 6.5, -30, 343)]));
    expect(rc.tones.map((t) => [t.frequencyHz, t.cycles.map((c) => c.decayRatePerS)])).toEqual([[171, [4]], [343, [30]]]);
  });

  // A report cycle (dsp/types.ts Cycle) with its times and rates.
  const cycle = (startS: number, endS: number, growthRatePerS: number | null, decayRatePerS: number | null = null, isImpulseResponse = false): Cycle => ({
    startS,
    endS,
    onsetS: growthRatePerS === null ? null : startS,
    onsetCi95S: growthRatePerS === null ? null : [startS - 0.05, startS + 0.05],
    growthRatePerS,
    growthRateCi95PerS: growthRatePerS === null ? null : [growthRatePerS - 0.2, growthRatePerS + 0.2],
    limitAmplitudeDbfs: null,
    limitAmplitudeCi95Dbfs: null,
    decayRatePerS,
    decayRateCi95PerS: decayRatePerS === null ? null : [decayRatePerS - 0.3, decayRatePerS + 0.3],
    isImpulseResponse,
  });
  const v2 = (tones: NonNullable<Report['tones']>): Report => ({ ...report([]), reportVersion: 2, tones });

  it('uses a version-2 report’s own cycles per tone, harmonics under their tone', () => {
    const rc = cyclesOf(v2([{ frequencyHz: 171, isSteadyLine: false, cycles: [cycle(10, 14, 6.5), cycle(1, 5, 7)], harmonics: [{ k: 3, frequencyHz: 513 }, { k: 2, frequencyHz: 342 }] }, { frequencyHz: 50, isSteadyLine: true, isMainsFrequency: true, cycles: [] }]));
    expect(rc.missing).toEqual([]);
    expect(rc.tones.length).toBe(2);
    expect(rc.tones[0]!.cycles.map((c) => c.growthRatePerS)).toEqual([7, 6.5]);
    expect(rc.tones[0]!.harmonics.map((h) => h.k)).toEqual([2, 3]);
    expect(rc.tones[1]).toMatchObject({ isSteadyLine: true, isMainsFrequency: true, cycles: [] });
    // The table shows the tone's cycles; the steady mains line is named in a sentence, not as a tone with cycles.
    expect(cycledTones(rc).map((t) => t.frequencyHz)).toEqual([171]);
    expect(steadyLinesLine(rc)).toBe('Steady lines (never grew or decayed: no firing cycles): 50.0 Hz (mains multiple).');
  });

  it('gives the median across cycles with the spread 1.4826 × MAD (Rousseeuw & Croux 1993, REFERENCES.md §95)', () => {
    // Worked by hand: rates 6, 7, 8, 7.5, 30 -> median 7.5; |deviations| 1.5, 0.5, 0.5, 0, 22.5 -> MAD 0.5 -> spread 0.7413.
    const rc = cyclesOf(v2([{ frequencyHz: 171, isSteadyLine: false, cycles: [cycle(0, 5, 6, 4), cycle(10, 15, 7, 5), cycle(20, 25, 8), cycle(30, 35, 7.5), cycle(40, 45, 30)] }]));
    const g = rc.tones[0]!.growth!;
    expect(g.medianPerS).toBe(7.5);
    expect(g.spreadPerS).toBeCloseTo(0.7413, 4);
    expect(g.count).toBe(5);
    // Two decays: median is their mean; one cycle alone gives no median (its own interval says more).
    expect(rc.tones[0]!.decay).toMatchObject({ medianPerS: 4.5, count: 2 });
    expect(medianAndSpread([3])).toBeNull();
    // The normal-consistency constant is 1/Φ⁻¹(3/4), Φ⁻¹(0.75) = 0.6744898 (normal tables).
    expect(MAD_TO_SD).toBeCloseTo(1 / 0.6744898, 4);
  });

  it('shows a ring-down after a knock as a decay with no onset and no growth', () => {
    const rc = cyclesOf(v2([{ frequencyHz: 240, isSteadyLine: false, cycles: [cycle(2, 3, null, 15, true)] }]));
    const cells = cycleCells(rc.tones[0]!.cycles[0]!, 0);
    expect(cells[2]).toBe('none (ring-down after a knock)');
    expect(cells[3]).toBe('— (knock)');
    expect(cells[5]).toBe('ring-down (knock) 15.0 1/s (95 % CI 14.7–15.3)');
  });
});

describe('readout layout', () => {
  it('splits a value from its interval so the interval can sit unbroken on its own line', () => {
    expect(splitInterval('7.02 1/s (95 % CI 6.80–7.25)')).toEqual(['7.02 1/s', '(95 % CI 6.80–7.25)']);
    expect(splitInterval('171.3 Hz')).toEqual(['171.3 Hz', '']);
  });

  it('gives a narrow interval of ζ or Q the decimals that tell its ends apart', () => {
    // Field screenshot: "0.00418 (95 % CI 0.00418–0.00418)" said nothing about the interval.
    expect(formatRatio(0.00418, [0.004177, 0.004183])).toBe('0.004180 (95 % CI 0.004177–0.004183)');
    expect(formatQ(120, [119.6, 120.4])).toBe('120.0 (95 % CI 119.6–120.4)');
    expect(formatQ(107, [92, 128])).toBe('107 (95 % CI 92–128)');
  });
});

describe('before/after sentence (difference of independent estimates, REFERENCES.md §91)', () => {
  it('the difference of 8.0 (7.6–8.4) and 4.8 (4.5–5.1) is −3.2 ± 0.5 1/s', () => {
    // se(b − a) = √(se_a² + se_b²) for independent estimates (REFERENCES.md §91): √(0.4² + 0.3²) = 0.5.
    const c = rateChange(8, [7.6, 8.4], 4.8, [4.5, 5.1]);
    expect(c?.deltaPerS).toBeCloseTo(-3.2, 12);
    expect(c?.halfWidthPerS).toBeCloseTo(0.5, 12);
    expect(c?.isResolved).toBe(true);
  });

  it('says it in a sentence, growth then decay', () => {
    const s = (g: number | null, gCi: [number, number] | null, d: number | null, dCi: [number, number] | null): Summary => ({ frequencyHz: 171, growthRatePerS: g, growthRateCi95PerS: gCi, decayRatePerS: d, decayRateCi95PerS: dCi, effectiveGainPerS: null, dampingRatio: null, qFactor: null });
    const text = beforeAfterSentences(s(8, [7.6, 8.4], 5, [4.7, 5.3]), s(4.8, [4.5, 5.1], 5.1, [4.8, 5.4]));
    expect(text[0]).toBe('The change lowered the growth rate by 3.2 ± 0.5 1/s (95 %), from 8.00 1/s to 4.80 1/s.');
    // 5.1 − 5.0 = 0.1 against √(0.3² + 0.3²) = 0.42: not resolved.
    expect(text[1]).toBe('The decay rate did not change beyond the measurement scatter: +0.1 ± 0.4 1/s (95 %), from 5.00 1/s to 5.10 1/s.');
    expect(beforeAfterSentences(s(8, [7.6, 8.4], null, null), s(null, null, null, null))[0]).toBe('After: no growth rate measured (before: 8.00 1/s (95 % CI 7.60–8.40)).');
  });

  it('formats the change with the decimals its interval supports', () => {
    expect(formatChange(3.2, 0.4)).toBe('3.2 ± 0.4 1/s');
    expect(formatChange(12.345, 0.031)).toBe('12.35 ± 0.03 1/s');
    expect(formatChange(-0.3, 0.5)).toBe('−0.3 ± 0.5 1/s');
  });
});

describe('re-analysis options', () => {
  it('a mode of interest gives the octave band around it (geometric centre)', () => {
    const [lo, hi] = octaveAround(176);
    expect(hi / lo).toBeCloseTo(2, 12);
    expect(Math.sqrt(lo * hi)).toBeCloseTo(176, 9);
  });

  it('names the marker whose time lies outside the record', () => {
    const o = { bandLowHz: 20, bandHighHz: 4000, markers: [{ timeS: 12, kind: 'driving-off', label: 'driving off' }] };
    expect(checkReanalysis(o, 10)).toBe('Marker 1 (“driving off”): its time must lie within the record, 0:00.0 to 0:10.0.');
    expect(checkReanalysis({ ...o, markers: [] }, 10)).toBeNull();
    expect(checkReanalysis({ ...o, bandHighHz: 30 }, 10)).toMatch(/^Band: /);
  });
});
