import { mkdirSync, writeFileSync } from 'node:fs';
import { join, resolve } from 'node:path';
import { humCycleEnvelope, synthesize } from '../../dsp/synth';
import { encodeWav } from '../../dsp/io/wav-write';

/** Folder of the generated fake-microphone recordings. */
export const FIXTURE_DIR = resolve('e2e-out/fixtures');

/**
 * Truth of the hum-cycle recording: a 171.3 Hz tone that starts from the background, grows
 * (Stuart–Landau, linear rate 7 1/s) into a limit cycle, and dies away at 4.5 1/s once the
 * driving stops, in white noise 60 dB below the limit amplitude.
 */
export const HUM_CYCLE = {
  sampleRateHz: 48_000,
  frequencyHz: 171.3,
  /** Late enough that the capture has settled: the fake device starts the file when capture opens, and the first second may stutter on a loaded machine. */
  onsetS: 2.5,
  startAmplitude: 0.004,
  growthPerS: 7,
  limitAmplitude: 0.4,
  offS: 5.5,
  decayPerS: 4.5,
  noiseRms: 0.0004,
  /** Noise-only tail after the decay, then exact zeros (RECIPE.md §4: the fake device repeats its last 10 ms after the end). */
  durationS: 8.5,
  zerosS: 0.4,
} as const;

/** Writes the hum-cycle WAV (mono, 16-bit, 48 kHz) and returns its absolute path. */
export function writeHumCycleWav(name = 'hum-cycle.wav'): string {
  const t = HUM_CYCLE;
  const signal = synthesize({
    sampleRateHz: t.sampleRateHz,
    durationS: t.durationS,
    tones: [
      {
        frequencyHz: t.frequencyHz,
        envelope: humCycleEnvelope({
          onsetS: t.onsetS,
          startAmplitude: t.startAmplitude,
          growthPerS: t.growthPerS,
          limitAmplitude: t.limitAmplitude,
          offS: t.offS,
          decayPerS: t.decayPerS,
        }),
      },
    ],
    noiseRms: t.noiseRms,
    seed: 31,
  });
  const zeros = Math.round(t.zerosS * t.sampleRateHz);
  const withTail = new Float32Array(signal.length + zeros);
  withTail.set(signal);
  return writeFixture(name, encodeWav(withTail, t.sampleRateHz, 'pcm16'));
}

/** Writes bytes under e2e-out/fixtures/ and returns the absolute path. */
export function writeFixture(name: string, bytes: Uint8Array): string {
  mkdirSync(FIXTURE_DIR, { recursive: true });
  const path = join(FIXTURE_DIR, name);
  writeFileSync(path, bytes);
  return path;
}

/** First number in a readout such as "171.3 Hz" or "7.02 1/s (95 % CI 6.80–7.25)" (typographic minus understood). */
export function firstNumber(text: string | null): number {
  const m = (text ?? '').replace(/\u2212/g, '-').match(/-?\d+(\.\d+)?/);
  return m ? Number(m[0]) : Number.NaN;
}

/** A steady calibrator-like tone: 1 kHz at `amplitude` (peak, full scale 1) for `durationS`, then exact zeros. */
export function writeCalibratorWav(name: string, amplitude: number, durationS = 12): string {
  const fs = 48_000;
  const tone = synthesize({ sampleRateHz: fs, durationS, tones: [{ frequencyHz: 1000, envelope: () => amplitude }] });
  const withTail = new Float32Array(tone.length + Math.round(0.4 * fs));
  withTail.set(tone);
  return writeFixture(name, encodeWav(withTail, fs, 'pcm16'));
}

/**
 * 16-bit linear sample → 8-bit A-law, ITU-T Rec. G.711 (1988), as in the widely used public-domain
 * g711.c of Sun Microsystems: segment search on |x|/8, 4 mantissa bits, even bits inverted (0x55).
 */
function linearToAlaw(pcm: number): number {
  const segEnd = [0x1f, 0x3f, 0x7f, 0xff, 0x1ff, 0x3ff, 0x7ff, 0xfff];
  let v = pcm >> 3;
  let mask: number;
  if (v >= 0) mask = 0xd5;
  else {
    mask = 0x55;
    v = -v - 1;
  }
  let seg = 0;
  while (seg < 8 && v > (segEnd[seg] ?? 0)) seg++;
  if (seg >= 8) return 0x7f ^ mask;
  const aval = (seg << 4) | (seg < 2 ? (v >> 1) & 0x0f : (v >> seg) & 0x0f);
  return aval ^ mask;
}

/** A WAV of A-law samples (format tag 6), an encoding the project's reader leaves to the browser. */
export function writeAlawWav(name: string, samples: Float32Array, sampleRateHz: number): string {
  const n = samples.length;
  const bytes = new Uint8Array(46 + n);
  const v = new DataView(bytes.buffer);
  const tag = (off: number, s: string): void => {
    for (let i = 0; i < 4; i++) v.setUint8(off + i, s.charCodeAt(i));
  };
  tag(0, 'RIFF');
  v.setUint32(4, 38 + n, true);
  tag(8, 'WAVE');
  tag(12, 'fmt ');
  v.setUint32(16, 18, true);
  v.setUint16(20, 6, true);
  v.setUint16(22, 1, true);
  v.setUint32(24, sampleRateHz, true);
  v.setUint32(28, sampleRateHz, true);
  v.setUint16(32, 1, true);
  v.setUint16(34, 8, true);
  v.setUint16(36, 0, true);
  tag(38, 'data');
  v.setUint32(42, n, true);
  for (let i = 0; i < n; i++) bytes[46 + i] = linearToAlaw(Math.max(-32768, Math.min(32767, Math.round((samples[i] ?? 0) * 32767))));
  return writeFixture(name, bytes);
}
