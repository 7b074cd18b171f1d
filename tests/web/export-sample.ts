// Sample sessions of known content for the export and import tests (a bench rig and a boiler room).
import type { TrackFrame } from '../../dsp/types';
import { createRng, humCycleEnvelope } from '../../dsp/synth';
import type { FullSession } from '../../web/storage/sessions';
import { summariseTrack } from '../../web/storage/track-summary';

/** A hum cycle track at 100 frames/s: quiet, Stuart–Landau growth, steady, decay; NaN frequency while quiet. */
export function sampleTrack(seed = 5, durationS = 8): TrackFrame[] {
  const env = humCycleEnvelope({ onsetS: 1, startAmplitude: 1e-3, growthPerS: 4, limitAmplitude: 0.3, offS: 6, decayPerS: 5 });
  const rng = createRng(seed);
  const out: TrackFrame[] = [];
  for (let i = 0; i < durationS * 100; i++) {
    const t = i / 100;
    const a = env(t);
    const state: TrackFrame['state'] = t < 1 ? 'quiet' : t < 3 ? 'growth' : t < 6 ? 'steady' : 'decay';
    out.push({
      timeS: t,
      frequencyHz: state === 'quiet' ? Number.NaN : 171.2 + 0.05 * rng.normal(),
      amplitudeDbfs: a > 0 ? 20 * Math.log10(a / Math.SQRT2) : -Infinity,
      levelDbfs: -60 + rng.normal(),
      state,
      isClipped: i === 450,
      isAfterGap: i === 700,
    });
  }
  return out;
}

export function sampleSession(p: { id?: string; site?: string; notes?: string; withAudio?: boolean; createdAtMs?: number; control?: number } = {}): FullSession {
  const track = sampleTrack();
  const audio = p.withAudio === false ? null : new Float32Array(8000 * 3).map((_, i) => 0.25 * Math.sin((2 * Math.PI * 171.2 * i) / 8000) * Math.min(1, i / 4000));
  const created = p.createdAtMs ?? Date.UTC(2026, 10, 20, 9, 30);
  return {
    record: {
      id: p.id ?? '3f0c6a52-8d1e-4b7a-9c33-0a1b2c3d4e5f',
      createdAtMs: created,
      updatedAtMs: created + 60_000,
      heartbeatAtMs: created + 60_000,
      status: 'complete',
      meta: {
        source: 'microphone',
        sampleRateHz: 8000,
        site: p.site ?? 'Bench rig B, lab 2',
        equipment: 'Heated tube 1.2 m',
        notes: p.notes ?? 'Gauze at 0.3 m from the bottom.\nSecond run "after" the baffle; flow < 2 m/s.',
        geometry: { lengthM: 1.2, diameterM: 0.048, ends: 'open-open', openEnd: 'unflanged', gasTemperatureC: 150 },
        calibrationOffsetDb: 120.5,
        calibrationSource: '94 dB calibrator',
        captureSettings: { echoCancellation: false, sampleRate: 44100, deviceLabel: 'built-in' },
      },
      markers: [
        { timeS: 0.5, kind: 'setting', label: 'heater power', value: p.control ?? 250, unit: 'W' },
        { timeS: 6, kind: 'driving-off', label: 'heater off' },
      ],
      gaps: [{ timeS: 7, missingS: 0.12 }],
      report: summariseTrack(track, 8000),
      durationS: 8,
      frameCount: track.length,
      frameChunkCount: 8,
      audio: { isKept: audio !== null, sampleCount: audio?.length ?? 0, chunkCount: audio ? 3 : 0 },
      siteKey: (p.site ?? 'Bench rig B, lab 2').toLowerCase(),
      equipmentKey: 'heated tube 1.2 m',
      history: ['Recorded on a phone.'],
    },
    track,
    audio,
  };
}
