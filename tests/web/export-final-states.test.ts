import { describe, expect, it } from 'vitest';
import { createAnalysis } from '../../dsp/index';
import { humCycleEnvelope, synthesize } from '../../dsp/synth';
import type { TrackFrame } from '../../dsp/types';
import { trackCsv } from '../../web/storage/export';

// The app's exported track gives each frame its final state, placed where the fitted curves put the
// boundaries (as the command line's --csv, tests/cli/inputs.test.ts), not the live state, which the
// regime detector confirms 0.1–1 s later. Truth: a hum cycle (dsp/synth.ts) with onset at 1.5 s,
// growth 8 1/s into a limit cycle, off at 5 s, decay 5 1/s.
describe('exported track states', () => {
  const fs = 8000;
  const onsetS = 1.5;
  const signal = synthesize({
    sampleRateHz: fs,
    durationS: 8,
    tones: [{ frequencyHz: 180, envelope: humCycleEnvelope({ onsetS, startAmplitude: 1e-3, growthPerS: 8, limitAmplitude: 0.3, offS: 5, decayPerS: 5 }) }],
    noiseRms: 3e-4,
    seed: 11,
  });
  const analysis = createAnalysis({ sampleRateHz: fs });
  const track: TrackFrame[] = [];
  for (let i = 0; i < signal.length; i += 1024) track.push(...analysis.push(signal.subarray(i, Math.min(signal.length, i + 1024))).frames.map((f) => ({ ...f })));
  const report = analysis.finish();
  const rows = trackCsv(track, undefined, report).trimEnd().split('\r\n').slice(1).map((l) => l.split(','));
  const stateCol = 4; // time_s,frequency_hz,amplitude_dbfs,level_dbfs,state

  it('starts each segment at its fitted boundary (within two frames), as the segment table says', () => {
    const segs = report.segments.filter((s) => s.kind !== 'quiet');
    expect(segs.map((s) => s.kind)).toContain('growth');
    const frameS = 2 * (track[1].timeS - track[0].timeS);
    for (const seg of segs) {
      const first = rows.find((r) => r[stateCol] === seg.kind && Number(r[0]) >= seg.startS - frameS);
      expect(first, seg.kind).toBeDefined();
      expect(Math.abs(Number(first?.[0]) - seg.startS)).toBeLessThan(frameS);
    }
  });

  it('reads growth shortly after the true onset, where the live state still said quiet', () => {
    const growth = report.segments.find((s) => s.kind === 'growth')!;
    const t = growth.startS + 0.05;
    const i = track.findIndex((f) => f.timeS >= t);
    expect(track[i].state).not.toBe('growth');
    expect(rows[i][stateCol]).toBe('growth');
  });
});
