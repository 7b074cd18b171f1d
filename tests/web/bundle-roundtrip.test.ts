// What the app exports, it imports: every session it can produce comes back identical (text of
// any kind, any measured number), and the audio travels as 16-bit PCM unless float is asked for.
import 'fake-indexeddb/auto';
import { DIAMETER_RANGE_M, GAS_TEMPERATURE_RANGE_C, LENGTH_RANGE_M } from '../../dsp/duct';
import { describe, expect, it } from 'vitest';
import fc from 'fast-check';
import { strFromU8, unzipSync } from 'fflate';
import type { Cycle, Interval, Marker, Report, Segment, TrackFrame } from '../../dsp/types';
import { openSessionDb } from '../../web/storage/db';
import { buildBundle, bundleStoredSessions, toJsonText, toSessionFile } from '../../web/storage/export';
import { importBundle, readBundle } from '../../web/storage/import';
import { deleteSession, loadFullSession, type FullSession } from '../../web/storage/sessions';
import { bundleOptions, defaultSettings, loadSettings, SETTINGS_KEY } from '../../web/settings';
import { sampleSession } from './export-sample';

const AT = Date.UTC(2026, 11, 1, 8, 0);
let dbCount = 0;
const uniqueName = (): string => `humgauge-roundtrip-${process.pid}-${Date.now()}-${dbCount++}`;

/** What an import gives back of a session: everything but the storage bookkeeping (chunk counts, keys, heartbeat). */
function carried(s: FullSession): unknown {
  const { frameChunkCount: _f, heartbeatAtMs: _h, siteKey: _s, equipmentKey: _e, isLocalRecording: _l, ...rest } = s.record;
  return { record: { ...rest, audio: { ...rest.audio, chunkCount: 0 } }, track: s.track, audio: s.audio };
}

/** Fields of the RIFF/WAVE fmt chunk at the start of a canonical 44-byte-header WAV. */
function wavFormat(bytes: Uint8Array): { tag: number; bits: number; rate: number } {
  const v = new DataView(bytes.buffer, bytes.byteOffset, bytes.byteLength);
  return { tag: v.getUint16(20, true), bits: v.getUint16(34, true), rate: v.getUint32(24, true) };
}

describe('bundle audio', () => {
  it('is 16-bit PCM by default: half the bytes of float, every sample within the quantisation step', async () => {
    const s = sampleSession();
    const pcm = unzipSync(buildBundle([s], AT));
    const float = unzipSync(buildBundle([s], AT, { audio: 'float32' }));
    const folder = Object.keys(pcm).find((n) => n.endsWith('/audio.wav'))!;
    // WAVE format tag 1 = PCM, 3 = IEEE float (Microsoft/IBM RIFF specification, 1991).
    expect(wavFormat(pcm[folder])).toEqual({ tag: 1, bits: 16, rate: 8000 });
    expect(wavFormat(float[folder])).toEqual({ tag: 3, bits: 32, rate: 8000 });
    expect(pcm[folder].length - 44).toBe(2 * s.audio!.length);
    const back = (await readBundle(buildBundle([s], AT)))[0].audio!;
    // The encoder writes round(x·32767) for x ≥ 0 and round(x·32768) below; the reader divides by
    // 32768: the error is at most half a step plus the gain difference x/32768.
    for (let i = 0; i < back.length; i++) expect(Math.abs(back[i] - s.audio![i])).toBeLessThanOrEqual((0.5 + Math.abs(s.audio![i])) / 32768 + 1e-9);
  });

  it('as float32 on request: every sample back exactly', async () => {
    const s = sampleSession();
    expect((await readBundle(buildBundle([s], AT, { audio: 'float32' })))[0].audio).toEqual(s.audio);
  });

  it('stays float when a sample lies beyond full scale, so nothing is clipped', async () => {
    const s = sampleSession();
    s.audio![10] = 1.7;
    s.audio![11] = -2.5;
    const files = unzipSync(buildBundle([s], AT));
    expect(wavFormat(files[Object.keys(files).find((n) => n.endsWith('/audio.wav'))!]).tag).toBe(3);
    expect((await readBundle(buildBundle([s], AT)))[0].audio).toEqual(s.audio);
  });
});

describe('the bundle audio setting', () => {
  it('is 16-bit unless float is asked for, and a damaged stored value falls back to 16-bit', () => {
    expect(bundleOptions(defaultSettings())).toEqual({ audio: 'pcm16' });
    expect(bundleOptions({ ...defaultSettings(), isExportingFloatAudio: true })).toEqual({ audio: 'float32' });
    const store = new Map<string, string>([[SETTINGS_KEY, JSON.stringify({ isExportingFloatAudio: 'yes' })]]);
    const kv = { getItem: (k: string) => store.get(k) ?? null, setItem: (k: string, v: string) => void store.set(k, v) };
    expect(bundleOptions(loadSettings(kv))).toEqual({ audio: 'pcm16' });
  });
});

describe('bundles of stored sessions (zipped in the storage worker)', () => {
  it('hold the chosen sessions still stored, in the order chosen, and import back identical', async () => {
    const a = sampleSession({ id: 'stored-a', site: 'Bench rig A' });
    const b = sampleSession({ id: 'stored-b', site: 'Boiler room B', withAudio: false });
    const db = await openSessionDb({ name: uniqueName() });
    await importBundle(db, buildBundle([a, b], AT, { audio: 'float32' }));
    const { bytes, sessionCount } = await bundleStoredSessions(db, ['stored-b', 'gone', 'stored-a'], AT, { audio: 'float32' });
    expect(sessionCount).toBe(2);
    const back = await readBundle(bytes);
    expect(back.map((s) => s.record.meta.site)).toEqual(['Boiler room B', 'Bench rig A']);
    expect(carried(back[1])).toEqual(carried((await loadFullSession(db, 'stored-a'))!));
    db.close();
  });

  it('refuse with a message when none of the chosen sessions is stored any more', async () => {
    const db = await openSessionDb({ name: uniqueName() });
    await expect(bundleStoredSessions(db, ['gone'], AT)).rejects.toThrow(/None of the chosen sessions is stored/);
    db.close();
  });
});

describe('what the app produces imports back', () => {
  it('markup-like text in site, equipment, file name and notes is data: imported as typed', async () => {
    const s = sampleSession();
    s.record.meta.site = '<img src=x onerror=alert(1)>';
    s.record.meta.equipment = '"><b>boiler</b>';
    s.record.meta.fileName = '<svg onload=alert(1)>.wav';
    s.record.meta.notes = 'javascript:alert(1) <script>x</script>';
    s.record.markers[0].label = '<i>heater</i>';
    const db = await openSessionDb({ name: uniqueName() });
    await importBundle(db, buildBundle([s], AT, { audio: 'float32' }));
    expect(carried((await loadFullSession(db, s.record.id))!)).toEqual(carried(s));
    db.close();
  });

  it('a 10-minute session whose Q interval is unbounded above imports', async () => {
    const s = sampleSession();
    s.record.durationS = 600;
    s.record.report!.summary.qFactor = 2.4e5;
    s.record.report!.summary.qFactorCi95 = [9e4, 3.7e7];
    s.record.report!.summary.decayRateCi95PerS = [-1e-4, 2e-3];
    expect((await readBundle(buildBundle([s], AT)))[0].record.report!.summary.qFactorCi95).toEqual([9e4, 3.7e7]);
  });

  it('a sensor session at a rate below 1 kHz that is not a whole number of Hz, with its audio', async () => {
    const s = sampleSession();
    s.record.meta.sampleRateHz = 512.5;
    s.record.report!.sampleRateHz = 512.5;
    const back = (await readBundle(buildBundle([s], AT, { audio: 'float32' })))[0];
    expect(carried(back)).toEqual(carried(s));
  });

  it('property: every session the app can produce imports back identical', async () => {
    const db = await openSessionDb({ name: uniqueName() });
    await fc.assert(
      fc.asyncProperty(arbitrarySession(), async (s) => {
        // Shrinking repeats ids: start each case from an empty store.
        await deleteSession(db, s.record.id);
        const bundle = buildBundle([s], AT, { audio: 'float32' });
        const result = await importBundle(db, bundle);
        expect(result.imported).toEqual([s.record.id]);
        const back = (await loadFullSession(db, s.record.id))!;
        expect(carried(back)).toEqual(carried(s));
        // And it exports again to the same session.json, byte for byte.
        expect(toJsonText(toSessionFile(back, AT))).toBe(strFromU8(unzipSync(bundle)[Object.keys(unzipSync(bundle)).find((n) => n.endsWith('session.json'))!]));
      }),
      { numRuns: 60, seed: 20261201 },
    );
    db.close();
  });
});

// ---------------------------------------------------------------------------------------------
// Sessions as the app can produce them: text as typed (any characters, markup included, up to the
// entry fields' lengths), measured numbers of any value including NaN and ±∞ (the analysis may give
// a Q of millions or an interval with an infinite end), inputs within what their entry accepts.

/** Any double; JSON has a single zero, so −0 is taken as 0 (a value the app cannot tell apart). */
const anyNumber = fc.double().map((x) => (Object.is(x, -0) ? 0 : x));
const finiteNumber = (min = -Number.MAX_VALUE, max = Number.MAX_VALUE) => fc.double({ min, max, noNaN: true }).map((x) => (Object.is(x, -0) ? 0 : x));
const HOSTILE = ['<img src=x onerror=alert(1)>', '"><b>', 'javascript:alert(1)', '</script><script>alert(1)</script>', 'flow < 2 m/s', '\u0007\u0000 bell', '\ud800 lone surrogate', '__proto__', 'a\r\nb\tc'];
const anyText = (maxLength: number) => fc.oneof(fc.string({ unit: 'binary', maxLength: Math.min(maxLength, 30) }), fc.constantFrom(...HOSTILE.filter((t) => t.length <= maxLength)), fc.constant('x'.repeat(maxLength)));
const interval: fc.Arbitrary<Interval> = fc.tuple(anyNumber, anyNumber);
const orNull = <T>(a: fc.Arbitrary<T>) => fc.option(a, { nil: null });
const maybe = <T>(a: fc.Arbitrary<T>) => fc.option(a, { nil: undefined });
const regime = fc.constantFrom('quiet', 'growth', 'steady', 'decay') as fc.Arbitrary<TrackFrame['state']>;

/** Drops keys whose value is undefined: a field the app leaves out is absent, not undefined. */
function defined<T extends object>(o: T): T {
  return Object.fromEntries(Object.entries(o).filter(([, x]) => x !== undefined)) as T;
}

const segment: fc.Arbitrary<Segment> = fc
  .record({ kind: regime, startS: anyNumber, endS: anyNumber, frequencyHz: anyNumber, ratePerS: orNull(anyNumber), rateCi95PerS: orNull(interval), model: maybe(orNull(fc.constantFrom('exponential', 'stuart-landau', 'generalised-saturation', 'log-linear'))), limitAmplitudeDbfs: maybe(orNull(anyNumber)), isImpulseResponse: maybe(fc.boolean()) })
  .map(defined);

/** A cycle of a tone (report version 2): times are finite and not before the start. */
const cycle: fc.Arbitrary<Cycle> = fc.record({
  startS: finiteNumber(0, 1e6),
  endS: finiteNumber(0, 1e6),
  onsetS: orNull(finiteNumber(0, 1e6)),
  onsetCi95S: orNull(interval),
  growthRatePerS: orNull(anyNumber),
  growthRateCi95PerS: orNull(interval),
  limitAmplitudeDbfs: orNull(anyNumber),
  limitAmplitudeCi95Dbfs: orNull(interval),
  decayRatePerS: orNull(anyNumber),
  decayRateCi95PerS: orNull(interval),
  isImpulseResponse: fc.boolean(),
});

const report: fc.Arbitrary<Report> = fc
  .record({
    reportVersion: fc.integer({ min: 1, max: 20 }),
    sampleRateHz: finiteNumber(100, 768_000),
    durationS: finiteNumber(0, 1e6),
    onsets: fc.array(fc.record({ timeS: anyNumber, frequencyHz: anyNumber }), { maxLength: 3 }),
    segments: fc.array(segment, { maxLength: 3 }),
    noiseDriven: fc.array(
      fc.record({ startS: anyNumber, endS: anyNumber, frequencyHz: anyNumber, decayRatePerS: anyNumber, decayRateCi95PerS: interval, lorentzianDecayRatePerS: maybe(anyNumber), lorentzianCi95PerS: maybe(interval), autocorrelationDecayRatePerS: maybe(anyNumber), autocorrelationCi95PerS: maybe(interval) }).map(defined),
      { maxLength: 2 },
    ),
    modeStatistics: maybe(
      fc.array(
        fc
          .record({ frequencyHz: anyNumber, startS: anyNumber, endS: anyNumber, linearGrowthRatePerS: orNull(anyNumber), linearGrowthRateCi95PerS: orNull(interval), saturation: orNull(anyNumber), noiseIntensity: orNull(anyNumber), regime: fc.constantFrom('stable', 'near-threshold', 'humming', 'undetermined') as fc.Arbitrary<'stable' | 'near-threshold' | 'humming' | 'undetermined'>, method: fc.constantFrom('amplitude-pdf', 'drift-diffusion', 'lorentzian+disagree'), reason: maybe(anyText(300)) })
          .map(defined),
        { maxLength: 2 },
      ),
    ),
    summary: fc
      .record({
        frequencyHz: orNull(anyNumber), growthRatePerS: orNull(anyNumber), decayRatePerS: orNull(anyNumber), effectiveGainPerS: orNull(anyNumber), dampingRatio: orNull(anyNumber), qFactor: orNull(anyNumber),
        growthRateCi95PerS: maybe(orNull(interval)), decayRateCi95PerS: maybe(orNull(interval)), effectiveGainCi95PerS: maybe(orNull(interval)), dampingRatioCi95: maybe(orNull(interval)), qFactorCi95: maybe(orNull(interval)),
        eFoldingTimeS: maybe(orNull(anyNumber)), doublingTimeS: maybe(orNull(anyNumber)), t60S: maybe(orNull(anyNumber)), limitAmplitudeDbfs: maybe(orNull(anyNumber)),
        growthRateCycleMedianPerS: maybe(orNull(anyNumber)), growthRateCycleSpreadPerS: maybe(orNull(anyNumber)), decayRateCycleMedianPerS: maybe(orNull(anyNumber)), decayRateCycleSpreadPerS: maybe(orNull(anyNumber)), cycleCount: maybe(fc.integer({ min: 0, max: 1000 })),
      })
      .map(defined),
    tones: maybe(
      fc.array(
        fc
          .record({ frequencyHz: anyNumber, isSteadyLine: fc.boolean(), isMainsFrequency: maybe(fc.boolean()), cycles: maybe(fc.array(cycle, { maxLength: 2 })), harmonics: maybe(fc.array(fc.record({ k: fc.integer({ min: 2, max: 1000 }), frequencyHz: anyNumber }), { maxLength: 2 })) })
          .map(defined),
        { maxLength: 3 },
      ),
    ),
    clipped: maybe(fc.array(fc.record({ startS: anyNumber, endS: anyNumber }), { maxLength: 2 })),
    warnings: maybe(fc.array(anyText(300), { maxLength: 2 })),
  })
  .map(defined) as fc.Arbitrary<Report>;

const marker: fc.Arbitrary<Marker> = fc
  .record({ timeS: finiteNumber(0, 1e6), kind: fc.constantFrom('driving-on', 'driving-off', 'setting', 'note'), label: anyText(500), value: maybe(finiteNumber()), unit: maybe(anyText(30)) })
  .map(defined);

const frame: fc.Arbitrary<TrackFrame> = fc.record({ timeS: finiteNumber(0, 1e6), frequencyHz: anyNumber, amplitudeDbfs: anyNumber, levelDbfs: anyNumber, state: regime, isClipped: fc.boolean(), isAfterGap: fc.boolean() });

function arbitrarySession(): fc.Arbitrary<FullSession> {
  return fc
    .record({
      id: fc.uuid(),
      createdAtMs: fc.integer({ min: 0, max: 4e12 }),
      status: fc.constantFrom('complete', 'interrupted', 'recovered', 'recording') as fc.Arbitrary<FullSession['record']['status']>,
      source: fc.constantFrom('microphone', 'file') as fc.Arbitrary<'microphone' | 'file'>,
      fileName: maybe(anyText(255)),
      sampleRateHz: fc.oneof(fc.constantFrom(8000, 44_100, 48_000, 96_000), finiteNumber(100, 768_000)),
      site: anyText(200),
      equipment: anyText(200),
      notes: anyText(20_000),
      geometry: maybe(
        fc
          .record({
            lengthM: finiteNumber(LENGTH_RANGE_M.min, LENGTH_RANGE_M.max), diameterM: finiteNumber(DIAMETER_RANGE_M.min, DIAMETER_RANGE_M.max),
            ends: fc.constantFrom('open-open', 'open-closed', 'closed-closed') as fc.Arbitrary<'open-open' | 'open-closed' | 'closed-closed'>,
            openEnd: fc.constantFrom('unflanged', 'flanged', 'none') as fc.Arbitrary<'unflanged' | 'flanged' | 'none'>,
            closedEnd: maybe(fc.constantFrom('upstream', 'downstream') as fc.Arbitrary<'upstream' | 'downstream'>),
            gasTemperatureC: finiteNumber(GAS_TEMPERATURE_RANGE_C.min, GAS_TEMPERATURE_RANGE_C.max), heaterPositionM: maybe(finiteNumber(0, LENGTH_RANGE_M.max)), hotTemperatureC: maybe(finiteNumber(GAS_TEMPERATURE_RANGE_C.min, GAS_TEMPERATURE_RANGE_C.max)),
          })
          .map(defined),
      ),
      calibrationOffsetDb: maybe(finiteNumber(-1000, 1000)),
      calibrationSource: maybe(anyText(300)),
      captureSettings: maybe(fc.dictionary(fc.stringMatching(/^[A-Za-z0-9_]{1,20}$/), fc.oneof(anyText(200), finiteNumber(), fc.boolean()), { maxKeys: 5 })),
      markers: fc.array(marker, { maxLength: 3 }),
      gaps: fc.array(fc.record({ timeS: finiteNumber(0, 1e6), missingS: finiteNumber(0, 1e6) }), { maxLength: 2 }),
      report: orNull(report),
      durationS: finiteNumber(0, 1e6),
      history: fc.array(anyText(1000), { maxLength: 2 }),
      stoppedReason: maybe(anyText(200)),
      track: fc.array(frame, { maxLength: 12 }),
      audio: orNull(fc.float32Array({ noDefaultInfinity: true, noNaN: true, minLength: 1, maxLength: 40 }).map((a) => a.map((x) => (Object.is(x, -0) ? 0 : x)))),
    })
    .map((p): FullSession => ({
      record: {
        id: p.id,
        createdAtMs: p.createdAtMs,
        updatedAtMs: p.createdAtMs + 1000,
        heartbeatAtMs: p.createdAtMs + 1000,
        // A session still recording is exported as interrupted (what it is on disk).
        status: p.status === 'recording' ? 'interrupted' : p.status,
        meta: defined({ source: p.source, fileName: p.fileName, sampleRateHz: p.sampleRateHz, site: p.site, equipment: p.equipment, notes: p.notes, geometry: p.geometry, calibrationOffsetDb: p.calibrationOffsetDb, calibrationSource: p.calibrationSource, captureSettings: p.captureSettings }),
        markers: p.markers,
        gaps: p.gaps,
        report: p.report,
        durationS: p.durationS,
        frameCount: p.track.length,
        frameChunkCount: 0,
        audio: defined({ isKept: p.audio !== null, sampleCount: p.audio?.length ?? 0, chunkCount: 0, stoppedReason: p.stoppedReason }),
        siteKey: p.site.toLowerCase(),
        equipmentKey: p.equipment.toLowerCase(),
        history: p.history,
      },
      track: p.track,
      audio: p.audio,
    }));
}
