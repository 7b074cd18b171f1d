// One home for each rule and threshold (house rule): the bench measures the analysis's own
// design, so it builds the tone demodulator from dsp/tone-store.ts instead of restating its
// envelope rate and bands.
import { readFileSync } from 'node:fs';
import { describe, expect, it } from 'vitest';

describe('the bench uses the analysis design where it is defined', () => {
  const bench = readFileSync('dsp/cli/bench-speed.ts', 'utf8');
  it('builds the envelope demodulator with createToneEnvelope at ENVELOPE_RATE_HZ', () => {
    expect(bench).not.toMatch(/createEnvelopeState\(/);
    expect(bench).toMatch(/createToneEnvelope\(fsA, Math\.max\(1, Math\.round\(fsA \/ ENVELOPE_RATE_HZ\)\)\)/);
  });
});
