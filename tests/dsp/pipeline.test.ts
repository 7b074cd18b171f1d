/**
 * End-to-end checks of the streaming analysis on seeded signals of known truth (dsp/synth.ts).
 * Truth values come from the signal definitions; tolerances are argued next to each check.
 */
import { describe, expect, it } from 'vitest';
import { createAnalysis } from '../../dsp/pipeline';
import { ENVELOPE_BANDWIDTH_HZ } from '../../dsp/tone-store';
import { humCycleEnvelope, mainsHum, noiseDrivenMode, steadyEnvelope, synthesize, type EnvelopeFn } from '../../dsp/synth';
import type { Marker, Report, TrackFrame } from '../../dsp/types';

function analyse(x: Float32Array, fs: number, opts: { block?: number; markers?: Marker[]; gapAt?: { sample: number; missing: number } } = {}): { report: Report; frames: TrackFrame[] } {
  const a = createAnalysis({ sampleRateHz: fs });
  for (const m of opts.markers ?? []) a.mark(m);
  const block = opts.block ?? 2048;
  const frames: TrackFrame[] = [];
  const feed = (from: number, to: number): void => {
    for (let i = from; i < to; i += block) frames.push(...a.push(x.subarray(i, Math.min(to, i + block))).frames);
  };
  if (opts.gapAt) {
    feed(0, opts.gapAt.sample);
    a.gap(opts.gapAt.missing);
    feed(opts.gapAt.sample + opts.gapAt.missing, x.length);
  } else feed(0, x.length);
  return { report: a.finish(), frames };
}

/**
 * Band background of the envelope for white noise of RMS sigma: |z|² noise power = 8σ²B/fs, B the
 * one-sided noise bandwidth of the envelope low-pass (a Blackman FIR whose length is chosen for a
 * noise bandwidth of ENVELOPE_BANDWIDTH_HZ; derived in dsp/envelope.ts).
 */
function bandNoisePower(sigma: number, fs: number): number {
  return (8 * sigma * sigma * ENVELOPE_BANDWIDTH_HZ) / fs;
}

/** Lower and upper ends of an interval widened by a factor about its centre. */
function widen(ci: [number, number], factor: number): [number, number] {
  const c = 0.5 * (ci[0] + ci[1]);
  const h = 0.5 * (ci[1] - ci[0]) * factor;
  return [c - h, c + h];
}

describe('hum cycle (onset 2 s, growth 8 1/s into saturation, driving off at 8 s, decay 5 1/s, 171 Hz)', () => {
  const fs = 48000;
  const sigma = 0.01;
  // The Landau curve starts at the band noise floor at 2 s, so "where the growth curve meets the
  // background" (DESIGN.md onset) is 2.0 s by construction.
  const startAmplitude = Math.sqrt(bandNoisePower(sigma, fs));
  const env = humCycleEnvelope({ onsetS: 2, startAmplitude, growthPerS: 8, limitAmplitude: 0.2, offS: 8, decayPerS: 5 });
  // Limit cycle 0.2 peak: tone power 0.02 over noise 1e-4 = 23 dB SNR (full band).
  const x = synthesize({ sampleRateHz: fs, durationS: 13, tones: [{ frequencyHz: 171, envelope: env }], noiseRms: sigma, seed: 11 });
  const { report, frames } = analyse(x, fs, { markers: [{ timeS: 8, kind: 'driving-off', label: 'heater off' }] });

  it('reports one onset near the truth', () => {
    expect(report.onsets).toHaveLength(1);
    // Brief: within 2 e-folding times (2/8 s) of the tone rising 6 dB above the band floor,
    // which happens at 2 + ln2/8 = 2.087 s.
    expect(Math.abs(report.onsets[0].timeS - (2 + Math.LN2 / 8))).toBeLessThan(2 / 8);
    // Frequency from the phase slope of the demodulated envelope over the growth (≈ 0.6 s, in-band
    // SNR rising to ~50 dB): the Cramér–Rao scale is 1e-3 Hz or less (REFERENCES.md §8); allow 0.02 Hz.
    expect(Math.abs(report.onsets[0].frequencyHz - 171)).toBeLessThan(0.02);
  });

  it('finds quiet, growth, steady and decay in order', () => {
    expect(report.segments.map((s) => s.kind)).toEqual(['quiet', 'growth', 'steady', 'decay', 'quiet']);
    const decay = report.segments[3];
    // The driving-off marker fixes the decay start.
    expect(Math.abs(decay.startS - 8)).toBeLessThan(0.05);
  });

  it('recovers the growth rate into saturation and the decay rate within their intervals', () => {
    const growth = report.segments.find((s) => s.kind === 'growth');
    const decay = report.segments.find((s) => s.kind === 'decay');
    expect(growth?.model).toBe('stuart-landau');
    expect(growth?.rateCi95PerS).not.toBeNull();
    expect(decay?.rateCi95PerS).not.toBeNull();
    // The 95 % intervals cover noise only; the 5 Hz envelope low-pass also smooths the knee into
    // saturation slightly (a bias well under the interval width), so allow 1.5× the interval.
    const g = widen(growth?.rateCi95PerS as [number, number], 1.5);
    expect(8).toBeGreaterThanOrEqual(g[0]);
    expect(8).toBeLessThanOrEqual(g[1]);
    const d = widen(decay?.rateCi95PerS as [number, number], 1.5);
    expect(-5).toBeGreaterThanOrEqual(d[0]);
    expect(-5).toBeLessThanOrEqual(d[1]);
  });

  it('summarises the main tone: effective gain = growth rate + decay rate', () => {
    const s = report.summary;
    expect(s.frequencyHz).not.toBeNull();
    // Limit-cycle frequency over 5 s of steady tone: phase-slope estimate, allow 0.005 Hz.
    expect(Math.abs((s.frequencyHz as number) - 171)).toBeLessThan(0.005);
    expect(s.growthRatePerS).not.toBeNull();
    expect(s.decayRatePerS).not.toBeNull();
    // REFERENCES.md §6: beta = s_g + alpha.
    expect(s.effectiveGainPerS).toBeCloseTo((s.growthRatePerS as number) + (s.decayRatePerS as number), 10);
    expect(Math.abs((s.effectiveGainPerS as number) - 13)).toBeLessThan(0.4);
    // Limit amplitude 0.2 peak = 20 log10(0.2) = −13.98 dBFS (full-scale sine = 0 dBFS).
    expect(Math.abs((s.limitAmplitudeDbfs as number) - 20 * Math.log10(0.2))).toBeLessThan(0.3);
  });

  it('emits track rows at about 100 per second with the tone in the limit cycle', () => {
    const rate = frames.length / 13;
    expect(rate).toBeGreaterThan(90);
    expect(rate).toBeLessThan(101);
    const mid = frames.filter((f) => f.timeS > 4 && f.timeS < 7);
    expect(mid.every((f) => f.state === 'steady' && Math.abs(f.frequencyHz - 171) < 0.2)).toBe(true);
    // Envelope 0.2 peak = −13.98 dBFS; the row amplitude follows it within 0.5 dB (band noise is 47 dB down).
    expect(mid.every((f) => Math.abs(f.amplitudeDbfs - 20 * Math.log10(0.2)) < 0.5)).toBe(true);
    for (let i = 1; i < frames.length; i++) expect(frames[i].timeS).toBeGreaterThan(frames[i - 1].timeS);
  });
});

describe('repeated hum cycles', () => {
  it('gives one onset, one growth fit and one decay fit per cycle', () => {
    const fs = 16000;
    const sigma = 0.01;
    const a0 = Math.sqrt(bandNoisePower(sigma, fs));
    const cycles = 10;
    const periodS = 5;
    const cycleEnv = humCycleEnvelope({ onsetS: 1, startAmplitude: a0, growthPerS: 12, limitAmplitude: 0.2, offS: 3, decayPerS: 8 });
    const env: EnvelopeFn = (t) => (t < cycles * periodS ? cycleEnv(t % periodS) : 0);
    const x = synthesize({ sampleRateHz: fs, durationS: cycles * periodS + 1, tones: [{ frequencyHz: 230, envelope: env }], noiseRms: sigma, seed: 5 });
    const { report } = analyse(x, fs, { block: 4096 });
    expect(report.onsets).toHaveLength(cycles);
    report.onsets.forEach((o, k) => {
      // Onset truth k·5 + 1 s; two e-folding times (2/12 s) of slack, as for the single cycle.
      expect(Math.abs(o.timeS - (k * periodS + 1))).toBeLessThan(2 / 12 + Math.LN2 / 12);
    });
    const growth = report.segments.filter((s) => s.kind === 'growth' && s.ratePerS !== null);
    const decay = report.segments.filter((s) => s.kind === 'decay' && s.ratePerS !== null);
    expect(growth).toHaveLength(cycles);
    expect(decay).toHaveLength(cycles);
    // Pooled over ten cycles the summary rates sit within 5 % of the truth.
    expect(Math.abs((report.summary.growthRatePerS as number) - 12)).toBeLessThan(0.6);
    expect(Math.abs((report.summary.decayRatePerS as number) - 8)).toBeLessThan(0.4);
  });
});

describe('what is not an onset', () => {
  it('a tone sounding from the start is tracked but gives no onset', () => {
    const fs = 16000;
    const x = synthesize({ sampleRateHz: fs, durationS: 12, tones: [{ frequencyHz: 140, envelope: steadyEnvelope(0.1) }], noiseRms: 0.01, seed: 8 });
    const { report } = analyse(x, fs);
    expect(report.onsets).toHaveLength(0);
    expect(report.tones?.some((t) => Math.abs(t.frequencyHz - 140) < 0.5)).toBe(true);
  });

  it('50 Hz mains hum with harmonics is a steady line, not an onset', () => {
    const fs = 16000;
    const x = synthesize({ sampleRateHz: fs, durationS: 30, tones: [mainsHum(50, 0.05, 6, 0.6)], noiseRms: 0.005, seed: 9 });
    const { report } = analyse(x, fs);
    expect(report.onsets).toHaveLength(0);
    const lines = report.tones?.filter((t) => t.isSteadyLine) ?? [];
    expect(lines.some((t) => Math.abs(t.frequencyHz - 50) < 0.3)).toBe(true);
    // Harmonic grouping: the 100-300 Hz harmonics are not reported as tones of their own.
    expect(report.tones?.some((t) => t.frequencyHz > 90)).toBe(false);
  });

  it('mains switched on mid-record is a steady line, not an onset', () => {
    const fs = 16000;
    const hum = mainsHum(60, 0.05, 4, 0.5);
    hum.envelope = steadyEnvelope(0.05, 5);
    const x = synthesize({ sampleRateHz: fs, durationS: 15, tones: [hum], noiseRms: 0.005, seed: 19 });
    expect(analyse(x, fs).report.onsets).toHaveLength(0);
  });

  it('a resonance excited only by noise is no onset; its damping is estimated from the quiet record', () => {
    const fs = 8000;
    // REFERENCES.md §7: stable mode x'' + 2αx' + ω0²x = ξ, α = 5 1/s, 170 Hz, 30 s record.
    const mode = noiseDrivenMode({ sampleRateHz: fs, durationS: 30, frequencyHz: 170, decayPerS: 5, rmsAmplitude: 0.05, seed: 21 });
    const floor = synthesize({ sampleRateHz: fs, durationS: 30, noiseRms: 0.005, seed: 22 });
    for (let i = 0; i < mode.length; i++) mode[i] += floor[i];
    const { report } = analyse(mode, fs, { block: 4096 });
    expect(report.onsets).toHaveLength(0);
    expect(report.noiseDriven.length).toBeGreaterThanOrEqual(1);
    const nd = report.noiseDriven[0];
    expect(Math.abs(nd.frequencyHz - 170)).toBeLessThan(0.5);
    // §7 table: the Whittle fit's spread on 30 s is 0.46 1/s; allow about 3 sd.
    expect(Math.abs(nd.decayRatePerS - 5)).toBeLessThan(1.5);
  });

  it('a quiet stretch longer than the quiet store (120 s) still finds its resonance (its frames transformed again)', () => {
    const fs = 8000;
    // REFERENCES.md §7: a stable mode, 333 Hz, α = 4 1/s, 200 s without a tone.
    const mode = noiseDrivenMode({ sampleRateHz: fs, durationS: 200, frequencyHz: 333, decayPerS: 4, rmsAmplitude: 0.01, seed: 250 });
    const floor = synthesize({ sampleRateHz: fs, durationS: 200, noiseRms: 0.005, seed: 24 });
    for (let i = 0; i < mode.length; i++) mode[i] += floor[i];
    const { report } = analyse(mode, fs, { block: 4096 });
    const long = report.noiseDriven.filter((nd) => nd.endS - nd.startS > 100);
    expect(long.length).toBeGreaterThanOrEqual(1);
    // The resonance search picks a bin of the averaged spectrum (about 1 Hz wide here); the damping fit refines it.
    for (const nd of long) expect(Math.abs(nd.frequencyHz - 333)).toBeLessThan(1);
  });
});

describe('several tones, harmonics, gaps, clipping, input checks', () => {
  it('reports the fundamental of a tone with a strong second harmonic', () => {
    const fs = 16000;
    const a0 = Math.sqrt(bandNoisePower(0.01, fs));
    const env = humCycleEnvelope({ onsetS: 2, startAmplitude: a0, growthPerS: 10, limitAmplitude: 0.1, offS: 7, decayPerS: 6 });
    const x = synthesize({ sampleRateHz: fs, durationS: 10, tones: [{ frequencyHz: 125, envelope: env, harmonics: [[2, 2.0]] }], noiseRms: 0.01, seed: 4 });
    const { report } = analyse(x, fs);
    expect(report.onsets).toHaveLength(1);
    expect(Math.abs(report.onsets[0].frequencyHz - 125)).toBeLessThan(0.5);
    expect(Math.abs((report.summary.frequencyHz as number) - 125)).toBeLessThan(0.2);
    expect(report.onsets.some((o) => Math.abs(o.frequencyHz - 250) < 2)).toBe(false);
  });

  it('tracks two tones at once', () => {
    const fs = 16000;
    const a0 = Math.sqrt(bandNoisePower(0.01, fs));
    const e1 = humCycleEnvelope({ onsetS: 1.5, startAmplitude: a0, growthPerS: 10, limitAmplitude: 0.1, offS: 20, decayPerS: 6 });
    const e2 = humCycleEnvelope({ onsetS: 4, startAmplitude: a0, growthPerS: 6, limitAmplitude: 0.05, offS: 20, decayPerS: 6 });
    const x = synthesize({
      sampleRateHz: fs,
      durationS: 10,
      tones: [
        { frequencyHz: 171, envelope: e1 },
        { frequencyHz: 263, envelope: e2 },
      ],
      noiseRms: 0.01,
      seed: 6,
    });
    const { report } = analyse(x, fs);
    expect(report.onsets).toHaveLength(2);
    expect(Math.abs(report.onsets[0].frequencyHz - 171)).toBeLessThan(0.5);
    expect(Math.abs(report.onsets[1].frequencyHz - 263)).toBeLessThan(0.5);
    expect(Math.abs(report.onsets[1].timeS - 4)).toBeLessThan(2 / 6 + Math.LN2 / 6);
  });

  it('does not bridge a gap in the input', () => {
    const fs = 16000;
    const a0 = Math.sqrt(bandNoisePower(0.01, fs));
    const env = humCycleEnvelope({ onsetS: 2, startAmplitude: a0, growthPerS: 8, limitAmplitude: 0.1, offS: 30, decayPerS: 5 });
    const x = synthesize({ sampleRateHz: fs, durationS: 12, tones: [{ frequencyHz: 171, envelope: env }], noiseRms: 0.01, seed: 12 });
    // 2 s missing from 6 s on (suspended capture).
    const { report, frames } = analyse(x, fs, { gapAt: { sample: 6 * fs, missing: 2 * fs } });
    expect(report.durationS).toBeCloseTo(12, 6);
    for (const s of report.segments) expect(s.startS < 6 && s.endS > 8).toBe(false);
    const after = frames.filter((f) => f.isAfterGap);
    expect(after).toHaveLength(1);
    expect(after[0].timeS).toBeGreaterThanOrEqual(8 - 0.05);
    // The tone sounding when input resumes is no new onset.
    expect(report.onsets).toHaveLength(1);
  });

  it('reports clipped spans and keeps them out of the fits', () => {
    const fs = 16000;
    const a0 = Math.sqrt(bandNoisePower(0.01, fs));
    const env = humCycleEnvelope({ onsetS: 2, startAmplitude: a0, growthPerS: 8, limitAmplitude: 0.5, offS: 7, decayPerS: 5 });
    const x = synthesize({ sampleRateHz: fs, durationS: 10, tones: [{ frequencyHz: 171, envelope: env }], noiseRms: 0.01, seed: 13 });
    // Overdrive 4.5-5.0 s: the recorder clips at full scale.
    for (let i = Math.round(4.5 * fs); i < 5 * fs; i++) x[i] = Math.max(-1, Math.min(1, 3 * x[i]));
    const { report } = analyse(x, fs);
    expect(report.clipped?.length).toBe(1);
    const c = report.clipped?.[0];
    expect(Math.abs((c?.startS ?? 0) - 4.5)).toBeLessThan(0.01);
    expect(Math.abs((c?.endS ?? 0) - 5.0)).toBeLessThan(0.01);
    expect(report.warnings?.some((w) => w.startsWith('clipping in 4.50'))).toBe(true);
    expect(Math.abs((report.summary.decayRatePerS as number) - 5)).toBeLessThan(0.3);
  });

  it('says so when there is no tone', () => {
    const fs = 16000;
    const x = synthesize({ sampleRateHz: fs, durationS: 8, noiseRms: 0.02, seed: 14 });
    const { report } = analyse(x, fs);
    expect(report.onsets).toHaveLength(0);
    expect(report.warnings).toContain('no tone found');
    expect(report.summary.frequencyHz).toBeNull();
  });

  it('reports sensibly on input shorter than one spectral frame, and on none', () => {
    const a = createAnalysis({ sampleRateHz: 48000 });
    a.push(new Float32Array(100));
    const r = a.finish();
    expect(r.durationS).toBeCloseTo(100 / 48000, 9);
    expect(r.onsets).toHaveLength(0);
    expect(r.warnings).toContain('no tone found');
    const empty = createAnalysis({ sampleRateHz: 44100 }).finish();
    expect(empty.durationS).toBe(0);
    expect(empty.segments).toHaveLength(0);
    expect(() => a.push(new Float32Array(10))).toThrow(/finish/);
  });

  it('rejects an unusable configuration with a clear message', () => {
    expect(() => createAnalysis({ sampleRateHz: 400 })).toThrow(/sampleRateHz/);
    expect(() => createAnalysis({ sampleRateHz: 48000, bandLowHz: 500, bandHighHz: 100 })).toThrow(/band/);
  });
});

describe('live spectrum', () => {
  // A sine centred on bin k of the 4096-point frame at 12 kHz (no decimation) has power a² in that
  // bin (Hann coherent gain, Harris 1978; dsp/spectrum.ts), i.e. 20·log10 a dBFS.
  const fs = 12000;
  const binHz = fs / 4096;
  const a = 0.1;
  const x = synthesize({ sampleRateHz: fs, durationS: 3, tones: [{ frequencyHz: 100 * binHz, envelope: steadyEnvelope(a) }], noiseRms: 0, seed: 1 });

  it('reads 20·log10 a at the tone’s bin, the same whether read at once or after a later push without a frame', () => {
    const now = createAnalysis({ sampleRateHz: fs });
    const atOnce = Float32Array.from(now.push(x).spectrumDbfs ?? []);
    const late = createAnalysis({ sampleRateHz: fs });
    const u = late.push(x);
    // 10 samples: far fewer than a hop, so no new frame.
    expect(late.push(new Float32Array(10)).spectrumDbfs).not.toBeNull();
    const read = u.spectrumDbfs ?? new Float32Array(0);
    expect(read.length).toBe(atOnce.length);
    expect(read.every((v, i) => v === atOnce[i])).toBe(true);
    // DC blocker flat within 0.001 dB in the band (dsp/condition.ts); float32 rounding.
    expect(read[100]).toBeCloseTo(20 * Math.log10(a), 2);
  });

  it('is null before the first frame', () => {
    expect(createAnalysis({ sampleRateHz: fs }).push(new Float32Array(100)).spectrumDbfs).toBeNull();
  });
});
