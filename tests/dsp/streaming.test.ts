/**
 * The same streaming object serves the live microphone (blocks of 128-4096 samples) and files (a
 * loop over blocks): the report and the track must not depend on how the input is cut. Every stage
 * runs sample by sample on its own state and frame work happens at fixed sample counts, so the
 * results are expected to be identical, not merely close.
 */
import { describe, expect, it } from 'vitest';
import { ROW_RATE_HZ } from '../../dsp/live';
import { createAnalysis } from '../../dsp/pipeline';
import { humCycleEnvelope, synthesize } from '../../dsp/synth';
import type { AnalysisUpdate, Onset, Report, Segment, TrackFrame } from '../../dsp/types';

interface Run {
  report: Report;
  frames: TrackFrame[];
  onsets: Onset[];
  segments: Segment[];
}

function run(x: Float32Array, fs: number, block: number, announceOnsets = true): Run {
  const a = createAnalysis({ sampleRateHz: fs, announceOnsets });
  a.mark({ timeS: 5, kind: 'driving-off', label: 'heater off' });
  const frames: TrackFrame[] = [];
  const onsets: Onset[] = [];
  const segments: Segment[] = [];
  for (let i = 0; i < x.length; i += block) {
    const u = a.push(x.subarray(i, Math.min(x.length, i + block)));
    // Update contents are valid until the next push: copy them.
    for (const f of u.frames) frames.push({ ...f });
    for (const o of u.onsets) onsets.push({ ...o });
    for (const s of u.segments) segments.push({ ...s });
  }
  return { report: a.finish(), frames, onsets, segments };
}

describe('block-size invariance', () => {
  // A hum cycle with a clipped stretch, at 44.1 kHz (decimation by 4 to 11025 Hz).
  const fs = 44100;
  const env = humCycleEnvelope({ onsetS: 1.5, startAmplitude: 3e-4, growthPerS: 10, limitAmplitude: 0.4, offS: 5, decayPerS: 6 });
  const x = synthesize({ sampleRateHz: fs, durationS: 7.5, tones: [{ frequencyHz: 171, envelope: env }], noiseRms: 0.01, seed: 31 });
  for (let i = Math.round(3 * fs); i < Math.round(3.2 * fs); i++) x[i] = Math.max(-1, Math.min(1, 3 * x[i]));
  const reference = run(x, fs, 4096);

  it('the reference run finds the event (so the comparison is not vacuous)', () => {
    expect(reference.report.onsets).toHaveLength(1);
    expect(reference.report.segments.some((s) => s.kind === 'decay' && s.ratePerS !== null)).toBe(true);
    expect(reference.report.clipped?.length).toBe(1);
    expect(reference.frames.length).toBeGreaterThan(600);
    expect(reference.onsets).toHaveLength(1);
  });

  it('a report-only run (no live onset announcements) gives the same report and track rows, and announces nothing', () => {
    const r = run(x, fs, 4096, false);
    expect(r.report).toEqual(reference.report);
    expect(r.frames).toEqual(reference.frames);
    expect(r.segments).toEqual(reference.segments);
    expect(r.onsets).toEqual([]);
  });

  for (const block of [1, 127, 1000]) {
    it(`blocks of ${block} samples give the same report, track rows and live events as blocks of 4096`, () => {
      const r = run(x, fs, block);
      expect(r.report).toEqual(reference.report);
      expect(r.frames).toEqual(reference.frames);
      expect(r.onsets).toEqual(reference.onsets);
      expect(r.segments).toEqual(reference.segments);
    });
  }

  it('live segments read after finish() are those read at once (their fits are made when first read, from the tone as it stood)', () => {
    const a = createAnalysis({ sampleRateHz: fs });
    a.mark({ timeS: 5, kind: 'driving-off', label: 'heater off' });
    const updates: AnalysisUpdate[] = [];
    for (let i = 0; i < x.length; i += 4096) updates.push(a.push(x.subarray(i, Math.min(x.length, i + 4096))));
    a.finish();
    const late = updates.flatMap((u) => u.segments.map((s) => ({ ...s })));
    expect(late.some((s) => s.ratePerS !== null)).toBe(true);
    expect(late).toEqual(reference.segments);
  });

  it('a block of uneven, changing sizes gives the same report', () => {
    const a = createAnalysis({ sampleRateHz: fs });
    a.mark({ timeS: 5, kind: 'driving-off', label: 'heater off' });
    let i = 0;
    let k = 0;
    const sizes = [128, 4096, 3, 2048, 777, 10000, 1];
    while (i < x.length) {
      const n = sizes[k++ % sizes.length];
      a.push(x.subarray(i, Math.min(x.length, i + n)));
      i += n;
    }
    expect(a.finish()).toEqual(reference.report);
  });
});

describe('a gap between pushes', () => {
  // A steady 233 Hz tone, 4 s, then 1 s of input missing (suspended capture), then 3 s more.
  const fs = 16000;
  const x = synthesize({ sampleRateHz: fs, durationS: 8, tones: [{ frequencyHz: 233, envelope: () => 0.1 }], noiseRms: 0.003, seed: 5 });
  const a = createAnalysis({ sampleRateHz: fs });
  const copied: TrackFrame[] = [];
  const handed: TrackFrame[][] = [];
  const feed = (from: number, to: number): void => {
    for (let i = from; i < to; i += 1024) {
      const u = a.push(x.subarray(i, Math.min(to, i + 1024)));
      // A reader that copies each update at once (what "valid until the next push" allows) ...
      for (const f of u.frames) copied.push({ ...f });
      // ... and the arrays the updates handed over, read at the end.
      handed.push(u.frames);
    }
  };
  feed(0, 4 * fs);
  a.gap(fs);
  feed(5 * fs, 8 * fs);
  a.finish();

  it('the rows a gap settles reach the next update, not the one already handed over', () => {
    const later = handed.flat();
    expect(copied.length).toBe(later.length);
    expect(copied.map((f) => f.timeS)).toEqual(later.map((f) => f.timeS));
  });

  it('rows run up to the gap and resume after it, in time order', () => {
    const before = copied.filter((f) => f.timeS < 4);
    const after = copied.filter((f) => f.timeS >= 5);
    expect(before.length + after.length).toBe(copied.length);
    // Rows every 1/ROW_RATE_HZ s (dsp/live.ts; on the envelope grid, so to within one envelope sample) on each side of the gap.
    for (const side of [before, after]) for (let i = 1; i < side.length; i++) expect(side[i].timeS - side[i - 1].timeS).toBeCloseTo(1 / ROW_RATE_HZ, 3);
    expect(after[0].isAfterGap).toBe(true);
    for (let i = 1; i < copied.length; i++) expect(copied[i].timeS).toBeGreaterThan(copied[i - 1].timeS);
  });
});
