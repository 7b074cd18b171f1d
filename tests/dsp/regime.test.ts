/**
 * Regime detection (stage 5): states and onsets on envelope sequences of known truth, then the
 * false-onset checks of the brief on whole recordings (toneless noise with ±10 dB loudness steps,
 * mains hum with harmonics).
 */
import { describe, expect, it } from 'vitest';
import { createAnalysis } from '../../dsp/pipeline';
import { createRegimeState, finishRegime, stepRegime, STATE_DECAY, STATE_GROWTH, STATE_QUIET, STATE_STEADY, type RegimeState } from '../../dsp/regime';
import { createRng, mainsHum, synthesize } from '../../dsp/synth';

const RATE_HZ = 300;

/**
 * Feeds an envelope power sequence: tone power a²(t) plus band noise whose power is exponentially
 * distributed with mean bg (|z|² of circular complex Gaussian noise: common practice, e.g. the
 * chi-square with 2 degrees of freedom of any textbook on narrow-band noise).
 */
function feed(st: RegimeState, durationS: number, tonePower: (t: number) => number, bg: (t: number) => number, seed: number): void {
  const rng = createRng(seed);
  const n = Math.round(durationS * RATE_HZ);
  for (let i = 0; i < n; i++) {
    const t = i / RATE_HZ;
    // Tone plus noise as complex amplitudes, so the cross term is right.
    const a = Math.sqrt(tonePower(t));
    const s = Math.sqrt(bg(t) / 2);
    const re = a + s * rng.normal();
    const im = s * rng.normal();
    stepRegime(st, i, re * re + im * im, bg(t));
  }
  finishRegime(st, n);
}

describe('regime state machine on envelope sequences', () => {
  it('stays quiet on band noise alone (60 s)', () => {
    const st = createRegimeState(RATE_HZ, true);
    feed(st, 60, () => 0, () => 1e-6, 1);
    expect(st.segments.map((s) => s.state)).toEqual([STATE_QUIET]);
  });

  it('follows quiet → growth → steady → decay → quiet and marks the onset', () => {
    // Tone power: 0 until 3 s, then e^{2·10 (t−3)}·bg (meets the background at 3 s), capped at
    // 40 dB over it (limit cycle) until 7 s, then decaying at 5 1/s.
    const bg = 1e-6;
    const capT = 3 + (40 * Math.log(10)) / 10 / 20;
    const tone = (t: number): number => {
      if (t < 3) return 0;
      if (t < capT) return bg * Math.exp(20 * (t - 3));
      if (t < 7) return bg * 1e4;
      return bg * 1e4 * Math.exp(-10 * (t - 7));
    };
    const st = createRegimeState(RATE_HZ, true);
    feed(st, 12, tone, () => bg, 2);
    expect(st.segments.map((s) => s.state)).toEqual([STATE_QUIET, STATE_GROWTH, STATE_STEADY, STATE_DECAY, STATE_QUIET]);
    const growth = st.segments[1];
    expect(growth.isOnset).toBe(true);
    expect(growth.reachedSteady).toBe(true);
    // The regime's growth start is where the excess last sat at ≤ 3 dB: within 0.2 s (2 e-folds
    // of amplitude at 10 1/s) of the truth (3 s, where the tone meets the background).
    expect(Math.abs(growth.startIdx / RATE_HZ - 3)).toBeLessThan(0.2);
    // Decay starts within 0.1 s of 7 s (the level must fall 1.5 dB: 0.035 s at 5 1/s).
    expect(Math.abs(st.segments[3].startIdx / RATE_HZ - 7)).toBeLessThan(0.1);
  });

  it('sets the quiet level from the quiet samples when a hum rises after a noisy head of the warm-up, and finds the hum that returns', () => {
    // A track started on the history just before a hum: 0.5 s of band noise, then a hum 50 dB over
    // it (rising at 30 1/s in amplitude) for 2 s, quiet for 5 s, and the hum again. The warm-up
    // (2 s) is mostly hum; its noisy head makes it look noise-like as a whole, and a quiet level
    // taken over all of it sat 50 dB up, so that the returning hum was never seen.
    const bg = 1e-6;
    const hum = (t0: number, t1: number) => (t: number): number => (t < t0 || t >= t1 ? 0 : bg * Math.min(1e5, Math.exp(60 * (t - t0))));
    const first = hum(0.5, 2.5);
    const second = hum(7.5, 10);
    const st = createRegimeState(RATE_HZ, true);
    feed(st, 12, (t) => first(t) + second(t), () => bg, 7);
    const growths = st.segments.filter((s) => s.state === STATE_GROWTH);
    expect(growths.map((s) => s.startIdx / RATE_HZ).filter((t) => Math.abs(t - 7.5) < 0.2), JSON.stringify(st.segments)).toHaveLength(1);
  });

  it('takes a tone sounding from the start as steady, with no onset', () => {
    const st = createRegimeState(RATE_HZ, true);
    feed(st, 10, () => 1e-3, () => 1e-6, 3);
    expect(st.segments.map((s) => s.state)).toEqual([STATE_STEADY]);
    expect(st.segments.some((s) => s.isOnset)).toBe(false);
  });

  it('takes a tone sounding at the start that dies away within the warm-up as steady, then decay', () => {
    // 40 dB over the background for 1 s, then decaying at 15 1/s into the noise (gone by ~1.6 s).
    const st = createRegimeState(RATE_HZ, true);
    feed(st, 6, (t) => 1e-6 * 1e4 * (t < 1 ? 1 : Math.exp(-30 * (t - 1))), () => 1e-6, 7);
    expect(st.segments.map((s) => s.state)).toEqual([STATE_STEADY, STATE_DECAY, STATE_QUIET]);
    expect(Math.abs(st.segments[1].startIdx / RATE_HZ - 1)).toBeLessThan(0.1);
  });

  it('takes a noise-driven resonance (exponentially distributed A², 20 dB over the band) as quiet', () => {
    // Resonance band noise 100× the neighbours' background: the envelope is still noise.
    const st2 = createRegimeState(RATE_HZ, true);
    const rng = createRng(5);
    for (let i = 0; i < 30 * RATE_HZ; i++) stepRegime(st2, i, -1e-4 * Math.log(1 - rng.uniform()), 1e-6);
    finishRegime(st2, 30 * RATE_HZ);
    expect(st2.segments.map((s) => s.state)).toEqual([STATE_QUIET]);
    // Baseline ≈ the resonance's mean ratio (100), from the warm-up median / ln 2 and the average.
    expect(st2.baseline).toBeGreaterThan(60);
    expect(st2.baseline).toBeLessThan(160);
  });

  it('gives no onset for a growth when onsets are not allowed (steady lines)', () => {
    const st = createRegimeState(RATE_HZ, false);
    feed(st, 8, (t) => (t < 3 ? 0 : 1e-6 * Math.min(1e4, Math.exp(20 * (t - 3)))), () => 1e-6, 6);
    expect(st.segments.some((s) => s.state === STATE_GROWTH)).toBe(true);
    expect(st.segments.some((s) => s.isOnset)).toBe(false);
  });
});

describe('false onsets on whole recordings', () => {
  it('none on 10 minutes of toneless noise with ±10 dB loudness steps', () => {
    const fs = 16000;
    const rng = createRng(77);
    const steps: { atS: number; gainDb: number }[] = [];
    for (let t = 10; t < 600; t += 10 + 10 * rng.uniform()) steps.push({ atS: t, gainDb: [-10, 0, 10][Math.floor(3 * rng.uniform())] });
    const x = synthesize({ sampleRateHz: fs, durationS: 600, noiseRms: 0.01, noiseSteps: steps, seed: 78 });
    const a = createAnalysis({ sampleRateHz: fs });
    let liveOnsets = 0;
    for (let i = 0; i < x.length; i += 4096) liveOnsets += a.push(x.subarray(i, i + 4096)).onsets.length;
    const r = a.finish();
    expect(steps.length).toBeGreaterThan(30);
    expect(liveOnsets).toBe(0);
    expect(r.onsets).toHaveLength(0);
    expect(r.segments.filter((s) => s.kind !== 'quiet')).toHaveLength(0);
  });

  it('none on steady 50 Hz and 60 Hz mains hum with harmonics under loudness steps', () => {
    const fs = 16000;
    for (const [mainsHz, seed] of [
      [50, 80],
      [60, 81],
    ]) {
      const x = synthesize({
        sampleRateHz: fs,
        durationS: 40,
        tones: [mainsHum(mainsHz, 0.03, 8, 0.7)],
        noiseRms: 0.005,
        noiseSteps: [
          { atS: 10, gainDb: 10 },
          { atS: 20, gainDb: -10 },
          { atS: 30, gainDb: 0 },
        ],
        seed,
      });
      const a = createAnalysis({ sampleRateHz: fs });
      for (let i = 0; i < x.length; i += 2048) a.push(x.subarray(i, i + 2048));
      const r = a.finish();
      expect(r.onsets).toHaveLength(0);
      expect(r.tones?.some((t) => t.isSteadyLine && Math.abs(t.frequencyHz - mainsHz) < 0.3)).toBe(true);
    }
  });
});
