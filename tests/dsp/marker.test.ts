// A 'driving-off' marker is a hint: the decay is fitted from the kink the envelope shows near it
// (dsp/kink.ts), so a marker tapped early or late by a human reaction time (0.2–0.5 s) gives the
// decay of the unmarked analysis, and the report says where the data turned. Recording: the demo
// bench tube (public/demo/bench-tube.wav, heater switched off at 13 s; its truth file gives the
// decay from the heated-tube model's characteristic equation, dsp/rig-sim.ts).
import { readFileSync } from 'node:fs';
import { describe, expect, it } from 'vitest';
import { decodeWav } from '../../dsp/io/wav';
import { createAnalysis } from '../../dsp/pipeline';
import type { Marker, Report } from '../../dsp/types';

const wav = decodeWav(new Uint8Array(readFileSync(new URL('../../public/demo/bench-tube.wav', import.meta.url))));
const truth = JSON.parse(readFileSync(new URL('../../public/demo/bench-tube.truth.json', import.meta.url), 'utf8')) as {
  steps: { atS: number; decayRatePerS: number | null }[];
};
const off = truth.steps.find((s) => s.decayRatePerS !== null);

function analyse(markers: Marker[]): Report {
  const fs = wav.summary.format.sampleRateHz;
  const a = createAnalysis({ sampleRateHz: fs });
  for (const m of markers) a.mark(m);
  const x = wav.samples;
  for (let i = 0; i < x.length; i += 2048) a.push(x.subarray(i, Math.min(x.length, i + 2048)));
  return a.finish();
}

describe('a driving-off marker is a hint', () => {
  const plain = analyse([]);
  it('the unmarked analysis agrees with the model (the baseline)', () => {
    expect(off).toBeDefined();
    // Within 5 % (the rig tests' bound, tests/dsp/recordings.test.ts).
    expect(Math.abs((plain.summary.decayRatePerS ?? 0) - (off?.decayRatePerS ?? NaN)) / (off?.decayRatePerS ?? NaN)).toBeLessThan(0.05);
  });

  for (const dt of [-0.5, -0.3, -0.2, 0.2, 0.3, 0.5]) {
    it(`a marker ${Math.abs(dt)} s ${dt < 0 ? 'early' : 'late'} gives the unmarked decay within 5 % and says where the data turned`, () => {
      const at = (off?.atS ?? NaN) + dt;
      const r = analyse([{ timeS: at, kind: 'driving-off', label: 'Driving off' }]);
      const d = r.summary.decayRatePerS ?? NaN;
      const d0 = plain.summary.decayRatePerS ?? NaN;
      expect(Math.abs(d - d0) / d0).toBeLessThan(0.05);
      // The marker is further from the kink than the envelope's resolution (one kernel, under 0.2 s).
      const w = (r.warnings ?? []).find((m) => m.startsWith('marker "Driving off"'));
      expect(w).toBeDefined();
      const turn = Number(/turns at ([0-9.]+) s/.exec(w ?? '')?.[1]);
      expect(Math.abs(turn - (off?.atS ?? NaN))).toBeLessThan(0.1);
    });
  }
});
