/**
 * Measures the microphone's level for a calibration: a few seconds through the same capture and
 * analysis as the Listen screen, so the offset applies to exactly the level the readout shows.
 */
import { createScope } from '../lifecycle';
import { openMicrophone } from './mic';
import { isFromWorker, transferablesOf, type ToWorker } from '../worker/protocol';
import { deviceKey } from '../settings';

export interface LevelMeasurement {
  /** Mean level over the measurement (power average of frame levels), dBFS. */
  levelDbfs: number;
  /** Spread of the frame levels (standard deviation), dB: large means the source was not steady. */
  spreadDb: number;
  deviceKey: string;
  deviceLabel: string;
  /** Frequency of the loudest line of the spectra (median over them), Hz, NaN when none. */
  toneHz: number;
}

/** Index of the largest value of a spectrum above its DC bin; 0 when none is finite. */
function loudestBin(spectrumDbfs: Float32Array): number {
  let best = 0;
  for (let k = 1; k < spectrumDbfs.length; k++) if (spectrumDbfs[k] > (best > 0 ? spectrumDbfs[best] : -Infinity)) best = k;
  return best;
}

/** Listens for `durationS` seconds and returns the mean level. Throws CaptureError for microphone problems. */
export async function measureLevel(durationS: number, onProgress: (fraction: number) => void): Promise<LevelMeasurement> {
  const scope = createScope();
  const runId = 1;
  try {
    const mic = await openMicrophone(scope, runId);
    const worker = new Worker(new URL('../worker/analysis.worker.ts', import.meta.url), { type: 'module', name: 'calibration' });
    scope.add(() => worker.terminate());
    const levels: number[] = [];
    const tones: number[] = [];
    const done = new Promise<void>((resolve, reject) => {
      worker.onmessage = (ev: MessageEvent) => {
        if (!isFromWorker(ev.data)) return;
        const m = ev.data;
        if (m.type === 'error') reject(new Error(m.message));
        if (m.type !== 'update') return;
        for (const f of m.frames) {
          // Skip the first half second: the capture settles and the frames fill.
          if (f.timeS < 0.5) continue;
          if (Number.isFinite(f.levelDbfs)) levels.push(f.levelDbfs);
        }
        // The calibrator's tone is the loudest line of the spectrum. (A track row names the main
        // tone of a hum, where a steady line gives way to any other line over its background: a
        // quantisation product of the calibrator's own tone could take the rows.)
        if (m.spectrumDbfs && m.timeS >= 0.5) {
          const top = loudestBin(m.spectrumDbfs);
          if (top > 0) tones.push(top * m.spectrumBinHz);
        }
        onProgress(Math.min(1, m.timeS / (durationS + 0.5)));
        if (m.timeS >= durationS + 0.5) resolve();
      };
    });
    const start: ToWorker = {
      type: 'start',
      id: runId,
      config: { sampleRateHz: mic.sampleRateHz },
      source: 'microphone',
      isKeepingAudio: false,
      port: mic.workerPort,
    };
    worker.postMessage(start, transferablesOf(start));
    const timeout = new Promise<never>((_, reject) => setTimeout(() => reject(new Error('no sound arrived from the microphone')), (durationS + 10) * 1000));
    await Promise.race([done, timeout]);
    if (levels.length === 0) throw new Error('the microphone delivered no usable level');
    let power = 0;
    for (const l of levels) power += 10 ** (l / 10);
    const meanDb = 10 * Math.log10(power / levels.length);
    let sq = 0;
    for (const l of levels) sq += (l - meanDb) ** 2;
    tones.sort((a, b) => a - b);
    return {
      levelDbfs: meanDb,
      spreadDb: Math.sqrt(sq / levels.length),
      deviceKey: deviceKey(mic.deviceLabel, mic.deviceId),
      deviceLabel: mic.deviceLabel,
      toneHz: tones.length ? tones[Math.floor(tones.length / 2)] ?? Number.NaN : Number.NaN,
    };
  } finally {
    await scope.dispose();
  }
}
