import { describe, expect, it } from 'vitest';
import {
  calibrationOffsetDb,
  checkBand,
  defaultSettings,
  deviceKey,
  loadSettings,
  saveSettings,
  SETTINGS_KEY,
  toDbSpl,
  type KeyValueStore,
} from '../../web/settings';
import { createLiveBuffer, appendFrames, fitLineOf, rowCount, rowIndex, trackOverview } from '../../web/run/live-buffer';
import { parseControlValue } from '../../web/views/live-markers';
import type { TrackFrame } from '../../dsp/types';

function memoryStore(initial: Record<string, string> = {}): KeyValueStore & { data: Map<string, string> } {
  const data = new Map(Object.entries(initial));
  return {
    data,
    getItem: (k) => data.get(k) ?? null,
    setItem: (k, v) => {
      data.set(k, v);
    },
  };
}

describe('settings', () => {
  it('round-trips through storage', () => {
    const store = memoryStore();
    const s = defaultSettings();
    s.bandLowHz = 40;
    s.bandHighHz = 2000;
    s.isAWeighted = true;
    s.theme = 'dark';
    s.calibrations['label:Built-in mic'] = { offsetDb: 132.2, source: 'calibrator 94 dB SPL at 1 kHz', dateIso: '2026-12-02T04:00:00Z' };
    expect(saveSettings(s, store)).toBe(true);
    expect(loadSettings(store)).toEqual(s);
  });

  it('falls back field by field on damaged storage, never throws', () => {
    expect(loadSettings(memoryStore({ [SETTINGS_KEY]: '{not json' }))).toEqual(defaultSettings());
    expect(loadSettings(null)).toEqual(defaultSettings());
    const damaged = loadSettings(
      memoryStore({
        [SETTINGS_KEY]: JSON.stringify({
          bandLowHz: 'x',
          bandHighHz: 2000,
          theme: 'purple',
          isAWeighted: true,
          calibrations: { good: { offsetDb: 120, source: 's', dateIso: 'd' }, bad: { offsetDb: 'NaN' }, silly: { offsetDb: 1e9 } },
        }),
      }),
    );
    expect(damaged.bandLowHz).toBe(20);
    expect(damaged.bandHighHz).toBe(4000);
    expect(damaged.theme).toBe('daylight');
    expect(damaged.isAWeighted).toBe(true);
    expect(Object.keys(damaged.calibrations)).toEqual(['good']);
  });

  it('reports a refused write instead of throwing', () => {
    const full: KeyValueStore = {
      getItem: () => null,
      setItem: () => {
        throw new DOMException('quota', 'QuotaExceededError');
      },
    };
    expect(saveSettings(defaultSettings(), full)).toBe(false);
  });

  it('checks the band', () => {
    expect(checkBand(20, 4000)).toBeNull();
    expect(checkBand(5, 4000)).toMatch(/at least 10 Hz/);
    expect(checkBand(20, 30_000)).toMatch(/at most 20000 Hz/);
    expect(checkBand(1000, 1500)).toMatch(/twice the lower/);
    expect(checkBand(Number.NaN, 100)).toMatch(/numbers/);
  });

  it('calibration offset = reference level − measured dBFS (REFERENCES.md §11, common practice)', () => {
    // A 94 dB SPL calibrator read at −38.2 dBFS gives an offset of 132.2 dB.
    expect(calibrationOffsetDb(94, -38.2)).toBeCloseTo(132.2, 9);
    // A reference meter reading 78.0 dB while the phone reads −51.5 dBFS.
    expect(calibrationOffsetDb(78, -51.5)).toBeCloseTo(129.5, 9);
    expect(calibrationOffsetDb(94, 3)).toBeNull();
    expect(calibrationOffsetDb(Number.NaN, -30)).toBeNull();
    const cal = { offsetDb: 132.2, source: 's', dateIso: '' };
    expect(toDbSpl(-38.2, cal)).toBeCloseTo(94, 9);
    expect(toDbSpl(-38.2, undefined)).toBeNull();
  });

  it('keys calibrations by microphone label, else id', () => {
    expect(deviceKey('Built-in mic', 'abc')).toBe('label:Built-in mic');
    expect(deviceKey('', 'abc')).toBe('id:abc');
    expect(deviceKey(undefined, undefined)).toBe('default');
  });

  it('reads a control value typed with a comma or a point', () => {
    expect(parseControlValue('60')).toEqual({ value: 60 });
    expect(parseControlValue(' 12,5 ')).toEqual({ value: 12.5 });
    expect(parseControlValue('')).toEqual({ value: null });
    expect(parseControlValue('lots')).toEqual({ error: '“lots” is not a number.' });
  });
});

function frame(timeS: number, amplitudeDbfs: number, isAfterGap = false): TrackFrame {
  return { timeS, frequencyHz: 170, amplitudeDbfs, levelDbfs: amplitudeDbfs, state: 'growth', isClipped: false, isAfterGap };
}

describe('live buffer', () => {
  it('keeps the newest rows in order when it wraps, and breaks the line at a gap', () => {
    const b = createLiveBuffer(8);
    const frames: TrackFrame[] = [];
    for (let i = 0; i < 10; i++) frames.push(frame(i * 0.01, -40 + i, i === 6));
    appendFrames(b, frames);
    expect(rowCount(b)).toBe(8);
    const times = Array.from({ length: 8 }, (_, k) => b.timeS[rowIndex(b, k)]);
    for (let k = 1; k < times.length; k++) expect(times[k]).toBeGreaterThanOrEqual(times[k - 1] ?? 0);
    const amps = Array.from({ length: 8 }, (_, k) => b.amplitudeDbfs[rowIndex(b, k)]);
    expect(amps.some((a) => Number.isNaN(a))).toBe(true);
    expect(b.gapTimesS).toEqual([0.06]);
    expect(() => createLiveBuffer(1)).toThrow(RangeError);
  });

  it('draws a decay line of slope 8.686·rate dB/s through the track (REFERENCES.md §5)', () => {
    // Track of an exact exponential decay at α = 5 1/s: level falls 43.43 dB/s.
    const b = createLiveBuffer(1000);
    const frames: TrackFrame[] = [];
    for (let i = 0; i <= 100; i++) frames.push(frame(2 + i * 0.01, -10 - 8.68588963806504 * 5 * i * 0.01));
    appendFrames(b, frames);
    const line = fitLineOf(b, { kind: 'decay', startS: 2, endS: 3, frequencyHz: 170, ratePerS: -5, rateCi95PerS: [-5.2, -4.8] });
    expect(line).not.toBeNull();
    expect(line?.slopeDbPerS).toBeCloseTo(-43.4294, 3);
    // The track is exactly on the line, so the intercept is the track's start level.
    expect(line?.interceptDb).toBeCloseTo(-10, 9);
    expect(fitLineOf(b, { kind: 'steady', startS: 2, endS: 3, frequencyHz: 170, ratePerS: null, rateCi95PerS: null })).toBeNull();
  });

  it('reduces a long track to min and max per pixel column, keeping spikes and gaps (uPlot habit, common practice)', () => {
    // 60 s at 100 rows/s, a sine of ±10 dB around −40 dBFS with one spike to −5 dBFS and one gap.
    const b = createLiveBuffer(60_000);
    const frames: TrackFrame[] = [];
    for (let i = 0; i < 6000; i++) frames.push(frame(i * 0.01, i === 3333 ? -5 : -40 + 10 * Math.sin(i / 37), i === 4000));
    appendFrames(b, frames);
    const o = trackOverview(b, 0, 300, -160);
    // At most 4 rows per column plus the gap row, and far fewer than the rows held.
    expect(o.timeS.length).toBeLessThanOrEqual(4 * 301 + 1);
    expect(o.timeS.length).toBeLessThan(1500);
    for (let k = 1; k < o.timeS.length; k++) expect(o.timeS[k]).toBeGreaterThan(o.timeS[k - 1] ?? 0);
    const amps = o.amplitudeDbfs.filter((a): a is number => a !== null);
    expect(Math.max(...amps)).toBe(-5);
    expect(Math.min(...amps)).toBeCloseTo(-50, 2);
    expect(o.amplitudeDbfs.includes(null)).toBe(true);
    // From a later time: only rows from there on.
    expect(trackOverview(b, 50, 300, -160).timeS[0]).toBeGreaterThanOrEqual(50);
  });
});
