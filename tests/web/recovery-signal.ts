import { humCycleEnvelope, synthesize } from '../../dsp/synth';

/**
 * The hum cycle the recovery tests store and analyse again (dsp/synth.ts, truth known): onset 1 s,
 * growth 6 1/s from 1e-3 into a 0.2 limit, off at 5 s, decay 4 1/s, in white noise of 1e-3 rms; 7 s.
 */
export function recoveryCycle(sampleRateHz: number, frequencyHz: number, seed: number): Float32Array {
  return synthesize({
    sampleRateHz,
    durationS: 7,
    tones: [{ frequencyHz, envelope: humCycleEnvelope({ onsetS: 1, startAmplitude: 1e-3, growthPerS: 6, limitAmplitude: 0.2, offS: 5, decayPerS: 4 }) }],
    noiseRms: 1e-3,
    seed,
  });
}
