/**
 * Stage 3b, tone tracking: confirmation after consecutive hits, continuity of a drifting tone,
 * two tones at once, and the mains-line rule.
 */
import { describe, expect, it } from 'vitest';
import { createPeakList, findPeaks, groupHarmonics } from '../../dsp/peak';
import { computeSpectrumFrame, createSpectrumState, feedSpectrum } from '../../dsp/spectrum';
import { synthesize } from '../../dsp/synth';
import { CONFIRM_HITS, createToneTrack, createTrackerState, isMainsMultiple, medianFrequencyHz, stepTracker, type ToneTrack } from '../../dsp/track';

/** Runs spectrum → peaks → tracker over x; confirmed tentatives become tracks at once. */
function trackAll(x: Float32Array, fs: number): { tracks: ToneTrack[]; confirmFrames: number[] } {
  const spec = createSpectrumState({ sampleRateHz: fs, frameSize: 4096, hopSize: 2048 });
  const peaks = createPeakList(32);
  const tracker = createTrackerState(spec.binHz, 32);
  const tracks: ToneTrack[] = [];
  const confirmFrames: number[] = [];
  let i = 0;
  while (i < x.length) {
    const k = Math.min(spec.toFrame, x.length - i);
    if (feedSpectrum(spec, x, i, i + k)) {
      computeSpectrumFrame(spec);
      const hi = spec.binCount - 2;
      findPeaks(spec, 5, hi, 6, peaks);
      groupHarmonics(spec, peaks, 5, hi, 10);
      const frame = spec.frameCount - 1;
      stepTracker(tracker, tracks, peaks, frame, (i + k) / fs, 10);
      for (let c = 0; c < tracker.confirmedCount; c++) {
        tracks.push(createToneTrack(tracker, tracker.confirmedFreqHz[c], frame, tracker.confirmedProm[c]));
        confirmFrames.push(frame);
      }
    }
    i += k;
  }
  return { tracks, confirmFrames };
}

describe('tone tracking', () => {
  const fs = 12000;

  it('confirms a strong tone at once, a weak one after CONFIRM_HITS, and keeps one track', () => {
    const strong = synthesize({ sampleRateHz: fs, durationS: 4, tones: [{ frequencyHz: 171, envelope: () => 0.05 }], noiseRms: 0.01, seed: 1 });
    const s = trackAll(strong, fs);
    expect(s.tracks).toHaveLength(1);
    // Prominence ≫ INSTANT_CONFIRM_DB in the first frame.
    expect(s.confirmFrames[0]).toBe(0);
    expect(Math.abs(medianFrequencyHz(s.tracks[0], 0, 10) - 171)).toBeLessThan(0.05);
    // A tone about 12 dB over the bin noise (between the new-track and fast-confirm thresholds):
    // per-bin noise 6σ²/N = 1.46e-7 at N = 4096; a² = 2.3e-6 → 12 dB.
    const weak = synthesize({ sampleRateHz: fs, durationS: 4, tones: [{ frequencyHz: 171, envelope: () => 0.0015 }], noiseRms: 0.01, seed: 1 });
    const w = trackAll(weak, fs);
    expect(w.tracks).toHaveLength(1);
    expect(w.confirmFrames[0]).toBeGreaterThanOrEqual(CONFIRM_HITS - 1);
  });

  it('follows a tone drifting by 3 Hz (a heating duct) without starting a second track', () => {
    // Linear chirp 170 → 173 Hz over 6 s: phase 2π(170 t + 0.25 t²).
    const n = 6 * fs;
    const x = new Float32Array(n);
    for (let i = 0; i < n; i++) {
      const t = i / fs;
      x[i] = 0.05 * Math.cos(2 * Math.PI * (170 * t + 0.25 * t * t));
    }
    const { tracks } = trackAll(x, fs);
    expect(tracks).toHaveLength(1);
    // The last frame's centre is ~0.17 s before the end: 170 + 0.5·5.8 ≈ 172.9 Hz.
    expect(Math.abs(tracks[0].freqHz - 172.9)).toBeLessThan(0.2);
  });

  it('tracks two tones at once', () => {
    const x = synthesize({
      sampleRateHz: fs,
      durationS: 4,
      tones: [
        { frequencyHz: 171, envelope: () => 0.05 },
        { frequencyHz: 210, envelope: () => 0.03 },
      ],
      noiseRms: 0.01,
      seed: 2,
    });
    const { tracks } = trackAll(x, fs);
    const f = tracks.map((t) => t.freqHz).sort((a, b) => a - b);
    expect(f).toHaveLength(2);
    expect(Math.abs(f[0] - 171)).toBeLessThan(0.1);
    expect(Math.abs(f[1] - 210)).toBeLessThan(0.1);
  });

  it('confirms nothing in white noise', () => {
    const x = synthesize({ sampleRateHz: fs, durationS: 20, noiseRms: 0.02, seed: 3 });
    expect(trackAll(x, fs).tracks).toHaveLength(0);
  });
});

describe('mains label', () => {
  // Grid frequency within ±0.1 % (common practice); a label only, not a rule (docs/DESIGN.md).
  it('labels the 1st-4th multiples of the given mains frequency and nothing else', () => {
    expect(isMainsMultiple(50.1, 50)).toBe(true);
    expect(isMainsMultiple(150.2, 50)).toBe(true);
    expect(isMainsMultiple(240, 60)).toBe(true);
    expect(isMainsMultiple(240, 50)).toBe(false);
    expect(isMainsMultiple(171, 50)).toBe(false);
    expect(isMainsMultiple(150.6, 50)).toBe(false);
    // Above the 4th multiple a line is not labelled (a hum at 399.3 Hz is not 8 × 50 Hz).
    expect(isMainsMultiple(399.3, 50)).toBe(false);
    expect(isMainsMultiple(300, 50)).toBe(false);
  });
});
