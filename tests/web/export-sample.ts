// Sample sessions of known content for the export and import tests (a bench rig and a boiler room).
import type { TrackFrame } from '../../dsp/types';
import { createRng, humCycleEnvelope } from '../../dsp/synth';
import type { FullSession } from '../../web/storage/sessions';
import { summariseTrack } from '../../web/storage/track-summary';

/** A hum cycle track at 100 frames/s: quiet, Stuart–Landau growth, steady, decay; NaN frequency while quiet. */
export function sampleTrack(seed = 5, durationS = 8, growthPerS = 4): TrackFrame[] {
  const env = humCycleEnvelope({ onsetS: 1, startAmplitude: 1e-3, growthPerS, limitAmplitude: 0.3, offS: 6, decayPerS: 5 });
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

export function sampleSession(p: { id?: string; site?: string; notes?: string; withAudio?: boolean; createdAtMs?: number; control?: number; growthPerS?: number } = {}): FullSession {
  const track = sampleTrack(5, 8, p.growthPerS ?? 4);
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

/**
 * A firing-rate ramp up and down through a hysteretic onset (bench rig), with markers carrying the
 * control value, a report and a matching track at 20 frames/s. Net rate 0.5 (c − 62) 1/s; the hum
 * starts at 65 % going up and holds down to 55 % (known truth for the stability map).
 */
export function rampSession(id = 'ramp-0001', createdAtMs = Date.UTC(2026, 10, 25, 14, 0)): FullSession {
  const controls = [40, 45, 50, 55, 60, 65, 70, 75, 80, 75, 70, 65, 60, 55, 50, 45, 40];
  const rate = (c: number): number => 0.5 * (c - 62);
  const stepS = 10;
  const markers: FullSession['record']['markers'] = [];
  const segments: NonNullable<FullSession['record']['report']>['segments'] = [];
  const noiseDriven: NonNullable<FullSession['record']['report']>['noiseDriven'] = [];
  let isHumming = false;
  controls.forEach((c, k) => {
    const t0 = k * stepS;
    const t1 = t0 + stepS;
    const goingDown = k > 8;
    markers.push({ timeS: t0, kind: 'setting', label: `firing rate ${c} %`, value: c, unit: '%' });
    const limit = -20 + 0.2 * (c - 65);
    if (!isHumming && rate(c) > 0) {
      segments.push({ kind: 'growth', startS: t0, endS: t0 + 2, frequencyHz: 171, ratePerS: rate(c), rateCi95PerS: [rate(c) - 0.3, rate(c) + 0.3], model: 'stuart-landau', limitAmplitudeDbfs: limit });
      segments.push({ kind: 'steady', startS: t0 + 2, endS: t1, frequencyHz: 171, ratePerS: null, rateCi95PerS: null, limitAmplitudeDbfs: limit });
      isHumming = true;
    } else if (isHumming && goingDown && c <= 50) {
      segments.push({ kind: 'decay', startS: t0, endS: t0 + 3, frequencyHz: 171, ratePerS: -2, rateCi95PerS: [-2.3, -1.7], model: 'exponential' });
      segments.push({ kind: 'quiet', startS: t0 + 3, endS: t1, frequencyHz: 171, ratePerS: null, rateCi95PerS: null });
      isHumming = false;
    } else if (isHumming) {
      segments.push({ kind: 'steady', startS: t0, endS: t1, frequencyHz: 171, ratePerS: null, rateCi95PerS: null, limitAmplitudeDbfs: limit });
    } else {
      segments.push({ kind: 'quiet', startS: t0, endS: t1, frequencyHz: 170, ratePerS: null, rateCi95PerS: null });
      noiseDriven.push({ startS: t0, endS: t1, frequencyHz: 170, decayRatePerS: -rate(c), decayRateCi95PerS: [-rate(c) - 0.4, -rate(c) + 0.4] });
    }
  });
  const durationS = controls.length * stepS;
  const track: TrackFrame[] = [];
  const dbPerNeper = 20 / Math.LN10;
  for (let i = 0; i < durationS * 20; i++) {
    const t = i / 20;
    const g = segments.find((s) => t >= s.startS && t < s.endS) ?? segments[segments.length - 1];
    let level = -70;
    if (g.kind === 'steady') level = g.limitAmplitudeDbfs ?? -20;
    else if (g.kind === 'growth') level = Math.min(g.limitAmplitudeDbfs ?? -20, -70 + dbPerNeper * (g.ratePerS ?? 0) * (t - g.startS) * 3);
    else if (g.kind === 'decay') level = Math.max(-70, -20 + dbPerNeper * (g.ratePerS ?? 0) * (t - g.startS) * 3);
    track.push({ timeS: t, frequencyHz: g.kind === 'quiet' ? Number.NaN : 171, amplitudeDbfs: level, levelDbfs: level - 2, state: g.kind, isClipped: false, isAfterGap: false });
  }
  const report: NonNullable<FullSession['record']['report']> = {
    reportVersion: 1,
    sampleRateHz: 48000,
    durationS,
    onsets: segments.filter((s) => s.kind === 'growth').map((s) => ({ timeS: s.startS, frequencyHz: 171 })),
    segments,
    noiseDriven,
    summary: { frequencyHz: 171, growthRatePerS: 1.5, decayRatePerS: 2, effectiveGainPerS: 3.5, dampingRatio: 2 / (2 * Math.PI * 171), qFactor: Math.PI * 171 / 2, growthRateCi95PerS: [1.2, 1.8], decayRateCi95PerS: [1.7, 2.3], limitAmplitudeDbfs: -17 },
  };
  return {
    record: {
      id,
      createdAtMs,
      updatedAtMs: createdAtMs,
      heartbeatAtMs: createdAtMs,
      status: 'complete',
      meta: { source: 'microphone', sampleRateHz: 48000, site: 'Bench rig B, lab 2', equipment: 'Premix burner rig', notes: 'Firing-rate ramp up and back down.' },
      markers,
      gaps: [],
      report,
      durationS,
      frameCount: track.length,
      frameChunkCount: 0,
      audio: { isKept: false, sampleCount: 0, chunkCount: 0 },
      siteKey: 'bench rig b, lab 2',
      equipmentKey: 'premix burner rig',
      history: [],
    },
    track,
    audio: null,
  };
}
