import { describe, expect, it } from 'vitest';
import { isFromWorker, logRowBins, parseToWorker, reduceToLogRows, transferablesOf, type FromWorker, type ToWorker } from '../../web/worker/protocol';
import { emptyLiveSummary, isSameTone, updateLiveSummary } from '../../web/worker/live-summary';
import type { Segment } from '../../dsp/types';
import { MIN_GAP_S, missingSeconds } from '../../web/capture/gap';

describe('worker protocol: messages to the worker', () => {
  it('accepts each well-formed request', () => {
    const good: ToWorker[] = [
      { type: 'start', id: 1, config: { sampleRateHz: 44_100 }, source: 'microphone', isKeepingAudio: false },
      { type: 'block', id: 1, samples: new Float32Array(2048) },
      { type: 'gap', id: 1, missingSamples: 4410 },
      { type: 'mark', id: 1, marker: { kind: 'driving-off', label: 'driving off' } },
      { type: 'mark', id: 1, marker: { kind: 'setting', label: 'setting 60 %', value: 60, unit: '%' } },
      { type: 'analyse-file', id: 2, config: { sampleRateHz: 48_000 }, channels: [new Float32Array(10)], isKeepingAudio: true },
      { type: 'analyse-wav', id: 3, file: new Blob([new Uint8Array(44)]), fileName: 'rig.wav', isKeepingAudio: false },
      { type: 'finish', id: 1 },
    ];
    for (const m of good) {
      const parsed = parseToWorker(m);
      expect(parsed.ok, JSON.stringify(m)).toBe(true);
    }
  });

  it('refuses malformed requests with a reason naming the problem', () => {
    const cases: [unknown, RegExp][] = [
      [null, /type and a whole-number id/],
      [{ type: 'start' }, /type and a whole-number id/],
      [{ type: 'start', id: 1.5 }, /type and a whole-number id/],
      [{ type: 'explode', id: 1 }, /unknown message type "explode"/],
      [{ type: 'start', id: 1, config: { sampleRateHz: 400 } }, /sample rate 400 Hz is outside/],
      [{ type: 'start', id: 1, config: { sampleRateHz: Number.NaN } }, /sample rate NaN Hz/],
      [{ type: 'start', id: 1 }, /sample rate undefined Hz/],
      [{ type: 'analyse-file', id: 1, config: { sampleRateHz: 48_000 }, channels: [] }, /no audio channels/],
      [{ type: 'analyse-file', id: 1, config: { sampleRateHz: 48_000 }, channels: [[0, 1]] }, /no audio channels/],
      [{ type: 'block', id: 1, samples: [0, 0] }, /Float32Array/],
      [{ type: 'analyse-wav', id: 1, fileName: 'x.wav' }, /no file to read/],
      [{ type: 'analyse-wav', id: 1, file: new Blob([]) }, /has no name/],
      [{ type: 'gap', id: 1, missingSamples: -5 }, /non-negative/],
      [{ type: 'mark', id: 1, marker: { kind: 'note' } }, /kind and a label/],
      [{ type: 'mark', id: 1, marker: { kind: 'setting', label: 'x', value: Number.POSITIVE_INFINITY } }, /finite number/],
    ];
    for (const [data, reason] of cases) {
      const parsed = parseToWorker(data);
      expect(parsed.ok, JSON.stringify(data)).toBe(false);
      if (!parsed.ok) expect(parsed.reason).toMatch(reason);
    }
  });

  it('recognises worker answers and ignores anything else', () => {
    expect(isFromWorker({ type: 'error', id: 3, message: 'x' })).toBe(true);
    expect(isFromWorker({ type: 'report', id: 3, report: {} })).toBe(true);
    expect(isFromWorker({ type: 'block', id: 3 })).toBe(false);
    expect(isFromWorker({ type: 'error' })).toBe(false);
    expect(isFromWorker('error')).toBe(false);
  });

  it('transfers sample buffers instead of copying them, once each', () => {
    const samples = new Float32Array(16);
    expect(transferablesOf({ type: 'block', id: 1, samples })).toEqual([samples.buffer]);
    const shared = new Float32Array(32);
    const left = shared.subarray(0, 16);
    const right = shared.subarray(16);
    // Two channels on one buffer: transferring it twice would throw a DataCloneError.
    expect(transferablesOf({ type: 'analyse-file', id: 1, config: { sampleRateHz: 48_000 }, channels: [left, right], isKeepingAudio: false })).toHaveLength(1);
    expect(transferablesOf({ type: 'finish', id: 1 })).toEqual([]);
  });

  it('a message survives structured cloning with its transferables (as postMessage does)', () => {
    const samples = new Float32Array([0.5, -0.25]);
    const msg: ToWorker = { type: 'block', id: 9, samples };
    const copy = structuredClone(msg, { transfer: transferablesOf(msg) });
    expect(parseToWorker(copy).ok).toBe(true);
    expect(Array.from((copy as { samples: Float32Array }).samples)).toEqual([0.5, -0.25]);
    // The sender's buffer is detached: the block was moved, not copied.
    expect(samples.length).toBe(0);
  });

  it('an update moves its kept audio, spectrum and spectrogram columns to the app instead of copying them', () => {
    const audio = [new Float32Array([0.25, -0.5]), new Float32Array([0.125])];
    const spectrumDbfs = new Float32Array([-60, -20]);
    const dbfs = new Float32Array([-80]);
    const msg: FromWorker = {
      type: 'update', id: 4, samplesAnalysed: 3, timeS: 3 / 48_000, frames: [], onsets: [], segments: [], spectrumDbfs, spectrumBinHz: 12,
      peakAbs: 0.5, isClipped: false, markers: [], summary: emptyLiveSummary(), mainFrequencyHz: Number.NaN,
      columns: [{ timeS: 0, dbfs }], columnBandHz: [20, 4000], audio,
    };
    expect(transferablesOf(msg)).toHaveLength(4);
    const copy = structuredClone(msg, { transfer: transferablesOf(msg) }) as Extract<FromWorker, { type: 'update' }>;
    expect(isFromWorker(copy)).toBe(true);
    expect(copy.audio.map((a) => Array.from(a))).toEqual([[0.25, -0.5], [0.125]]);
    // Moved (HTML structured clone with transfer: the sender's buffers are detached), not copied.
    expect([...audio, spectrumDbfs, dbfs].map((a) => a.length)).toEqual([0, 0, 0, 0]);
  });
});

function seg(kind: Segment['kind'], frequencyHz: number, ratePerS: number | null, ci: [number, number] | null): Segment {
  return { kind, startS: 1, endS: 2, frequencyHz, ratePerS, rateCi95PerS: ci };
}

describe('spectrogram rows', () => {
  // Log-spaced rows (common practice for a spectrogram's frequency axis): row r spans
  // lo·(hi/lo)^(r/R) … lo·(hi/lo)^((r+1)/R), so a frequency f sits in row ⌊R·ln(f/lo)/ln(hi/lo)⌋.
  const binHz = 12_000 / 4096;
  const [lo, hi, rows] = [20, 4000, 192];
  it('a tone lands in the row whose log-spaced edges hold its frequency, and no row loses it', () => {
    for (const f of [31.3, 171, 997, 2503]) {
      const k = Math.round(f / binHz);
      const spectrum = new Float32Array(2049).fill(-120);
      spectrum[k] = -20;
      const out = new Float32Array(rows);
      reduceToLogRows(spectrum, binHz, lo, hi, out);
      const expected = Math.floor((rows * Math.log((k * binHz) / lo)) / Math.log(hi / lo));
      const loudRows = [...out.keys()].filter((r) => out[r] === -20);
      expect(loudRows.length).toBeGreaterThan(0);
      // Rows narrower than a bin take their nearest bin, so a low tone may fill neighbouring rows too.
      expect(Math.min(...loudRows)).toBeLessThanOrEqual(expected + 1);
      expect(Math.max(...loudRows)).toBeGreaterThanOrEqual(expected - 1);
    }
  });
  it('the rows cover the band without a gap: each row starts at or after the previous row’s first bin', () => {
    const map = logRowBins(2049, binHz, lo, hi, rows);
    for (let r = 1; r < rows; r++) {
      expect(map[2 * r]).toBeGreaterThanOrEqual(map[2 * r - 2]);
      expect(map[2 * r]).toBeLessThanOrEqual(map[2 * r - 1] + 1);
    }
    expect(map[2 * rows - 1]).toBe(Math.round(hi / binHz) - 1);
  });
});

describe('live summary from closed segments', () => {
  it('derives damping ratio and Q of the REFERENCES.md §5 worked example from a decay segment', () => {
    // REFERENCES.md §5: f = 170 Hz (damped), α = 5 1/s → ζ = 4.680976e-3, Q = 106.8153.
    const s = updateLiveSummary(emptyLiveSummary(), [seg('decay', 170, -5, [-5.5, -4.5])], { frequencyHz: 170, regime: 'decay' }, 170);
    expect(s.decayRatePerS).toBe(5);
    expect(s.decayRateCi95PerS).toEqual([4.5, 5.5]);
    expect(s.dampingRatio).toBeCloseTo(4.680976e-3, 9);
    expect(s.qFactor).toBeCloseTo(106.8153, 3);
    // T60 = 6.907755/α = 1.381551 s (REFERENCES.md §5).
    expect(s.t60S).toBeCloseTo(1.381551, 6);
    expect(s.dampingRatioCi95?.[0]).toBeLessThan(s.dampingRatio ?? 0);
    expect(s.qFactorCi95?.[1]).toBeGreaterThan(s.qFactor ?? 0);
  });

  it('effective gain is growth + decay (REFERENCES.md §6 worked example: s 3, α 5 → β 8)', () => {
    let s = updateLiveSummary(emptyLiveSummary(), [seg('growth', 170, 3, [2.8, 3.2])], null, 170);
    expect(s.effectiveGainPerS).toBeNull();
    s = updateLiveSummary(s, [seg('decay', 170, -5, [-5.3, -4.7])], null, 170);
    expect(s.growthRatePerS).toBe(3);
    expect(s.effectiveGainPerS).toBe(8);
    // Half-widths 0.2 and 0.3 add in quadrature: 0.3606 (first-order propagation, independent estimates).
    expect(s.effectiveGainCi95PerS?.[0]).toBeCloseTo(8 - Math.hypot(0.2, 0.3), 9);
    expect(s.effectiveGainCi95PerS?.[1]).toBeCloseTo(8 + Math.hypot(0.2, 0.3), 9);
  });

  it('ignores segments of other candidate tones and rates of the wrong sign', () => {
    let s = updateLiveSummary(emptyLiveSummary(), [seg('growth', 171.3, 7, [6.5, 7.5])], null, 171.3);
    // A weaker tone at 140 Hz, and a "decay" of the main tone with a positive rate: neither counts.
    s = updateLiveSummary(s, [seg('growth', 140, 0.2, [0, 0.4]), seg('decay', 171.3, 4.1, [-60, 70])], null, 171.3);
    expect(s.growthRatePerS).toBe(7);
    expect(s.decayRatePerS).toBeNull();
    s = updateLiveSummary(s, [seg('decay', 139.9, -6, [-7, -5]), seg('decay', 171.2, -4.5, [-4.6, -4.4])], null, 171.3);
    expect(s.decayRatePerS).toBe(4.5);
  });

  it('same tone within 1.5 % or 1.5 Hz', () => {
    expect(isSameTone(171.3, 171.3)).toBe(true);
    expect(isSameTone(173.8, 171.3)).toBe(true);
    expect(isSameTone(174.2, 171.3)).toBe(false);
    expect(isSameTone(51.4, 50)).toBe(true);
    expect(isSameTone(140, Number.NaN)).toBe(true);
    expect(isSameTone(Number.NaN, 171.3)).toBe(false);
  });

  it('keeps the regime and frequency of the newest frame', () => {
    const s = updateLiveSummary(emptyLiveSummary(), [], { frequencyHz: 88.2, regime: 'steady' });
    expect(s.regime).toBe('steady');
    expect(s.latestFrequencyHz).toBe(88.2);
  });
});

describe('gap detection from the audio and wall clocks', () => {
  it('reports the wall time the audio clock did not see', () => {
    // 10 s on the wall, 6.5 s of audio: 3.5 s of input were lost while suspended.
    expect(missingSeconds({ wallMs: 1000, audioS: 2 }, { wallMs: 11_000, audioS: 8.5 })).toBeCloseTo(3.5, 9);
  });
  it('ignores clock jitter below the threshold and clocks that run backwards', () => {
    expect(missingSeconds({ wallMs: 0, audioS: 0 }, { wallMs: 2000, audioS: 2 - MIN_GAP_S / 2 })).toBe(0);
    expect(missingSeconds({ wallMs: 0, audioS: 5 }, { wallMs: 1000, audioS: 7 })).toBe(0);
    expect(missingSeconds({ wallMs: 0, audioS: 0 }, { wallMs: Number.NaN, audioS: 1 })).toBe(0);
  });
});
