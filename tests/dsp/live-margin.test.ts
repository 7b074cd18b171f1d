import { describe, expect, it } from 'vitest';
import { createLiveMargin, estimateLiveMargin, isLiveMarginDue, liveMarginWindow, pushLiveMargin, restartLiveMargin } from '../../dsp/live-margin';
import { noiseDrivenMode, synthesize } from '../../dsp/synth';

describe('live margin to humming (ν from the noise while listening)', () => {
  it('finds the resonance, estimates ν = −decay rate, and its interval narrows as data comes in', () => {
    const fs = 48000;
    // REFERENCES.md §7: stable mode α = 5 1/s at 170 Hz excited by noise, over a broadband floor.
    const x = noiseDrivenMode({ sampleRateHz: fs, durationS: 45, frequencyHz: 170, decayPerS: 5, rmsAmplitude: 0.05, seed: 31 });
    const floor = synthesize({ sampleRateHz: fs, durationS: 45, noiseRms: 0.005, seed: 32 });
    const st = createLiveMargin({ sampleRateHz: fs });
    const widths: number[] = [];
    let last = null;
    for (let i = 0; i < x.length; i += 4800) {
      const b = x.slice(i, i + 4800);
      for (let k = 0; k < b.length; k++) b[k] += floor[i + k];
      pushLiveMargin(st, b);
      if (isLiveMarginDue(st)) {
        const m = estimateLiveMargin(st, Number.NaN);
        if (m) {
          widths.push(m.growthRateCi95PerS[1] - m.growthRateCi95PerS[0]);
          last = m;
        }
      }
    }
    expect(last).not.toBeNull();
    if (last === null) return;
    expect(Math.abs(last.frequencyHz - 170)).toBeLessThan(1);
    // §7 table: spread of the estimate ~0.4 1/s at 45 s; 1.5 1/s is about 3.5 sd.
    expect(Math.abs(last.growthRatePerS + 5)).toBeLessThan(1.5);
    expect(last.regime).toBe('stable');
    // Interval width falls roughly as 1/√T (REFERENCES.md §7): 10 s → 45 s about halves it.
    expect(widths[widths.length - 1]).toBeLessThan(0.75 * widths[0]);
  });

  it('restarts empty after a change of regime and checks its configuration', () => {
    const st = createLiveMargin({ sampleRateHz: 16000 });
    pushLiveMargin(st, new Float32Array(16000 * 12));
    expect(isLiveMarginDue(st)).toBe(true);
    restartLiveMargin(st);
    expect(isLiveMarginDue(st)).toBe(false);
    expect(st.startS).toBeCloseTo(12, 9);
    expect(() => createLiveMargin({ sampleRateHz: 100 })).toThrow(/sampleRateHz/);
  });

  it('reads the latest window in time order, after the ring wrapped, as boxcar means of the input', () => {
    // Boxcar decimation by definition (common practice): ring sample j is the mean of input samples
    // j·factor … (j + 1)·factor − 1; the window holds the latest `capacity` of them, oldest first.
    const fs = 16000;
    const st = createLiveMargin({ sampleRateHz: fs, windowS: 10 });
    const factor = st.factor;
    const input = new Float32Array(fs * 27 + 5);
    for (let i = 0; i < input.length; i++) input[i] = Math.sin(0.001 * i) + ((i * 7919) % 13) / 13;
    for (let i = 0; i < input.length; i += 777) pushLiveMargin(st, input.subarray(i, i + 777));
    const { x, x0 } = liveMarginWindow(st);
    const count = Math.floor(input.length / factor);
    expect(x.length).toBe(st.capacity);
    expect(x0).toBe(count - st.capacity);
    for (const j of [0, 1, st.capacity >> 1, st.capacity - 2, st.capacity - 1]) {
      let acc = 0;
      for (let k = 0; k < factor; k++) acc += input[(x0 + j) * factor + k];
      expect(x[j]).toBe(Math.fround(acc / factor));
    }
  });

  it('on a full 60 s window, estimates again once a sixth of it (10 s) is new, not every 2 s', () => {
    // The project's own cadence rule (dsp/live-margin.ts LIVE_MARGIN_NEW_SHARE, derived there), not a physical value.
    const fs = 16000;
    const st = createLiveMargin({ sampleRateHz: fs });
    pushLiveMargin(st, new Float32Array(fs * 60));
    expect(isLiveMarginDue(st)).toBe(true);
    estimateLiveMargin(st, Number.NaN);
    pushLiveMargin(st, new Float32Array(fs * 9));
    expect(isLiveMarginDue(st)).toBe(false);
    pushLiveMargin(st, new Float32Array(fs * 1));
    expect(isLiveMarginDue(st)).toBe(true);
  });
});
