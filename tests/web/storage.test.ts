import 'fake-indexeddb/auto';
import { afterEach, describe, expect, it } from 'vitest';
import { openDB } from 'idb';
import type { Report, TrackFrame } from '../../dsp/types';
import { createRng } from '../../dsp/synth';
import { DB_VERSION, openSessionDb, packFrames, unpackFrames, type SessionRecordV1 } from '../../web/storage/db';
import {
  deleteSession,
  findInterruptedSessions,
  hourCostBytes,
  listSessions,
  loadAudio,
  loadFullSession,
  loadTrack,
  putFullSessions,
  recoverInterruptedSessions,
  restoreSession,
  STALE_RECORDING_MS,
  updateSessionMeta,
  type FullSession,
} from '../../web/storage/sessions';
import { createSessionRecorder } from '../../web/storage/recorder';
import { summariseTrack } from '../../web/storage/track-summary';
import type { NewSessionMeta } from '../../web/storage/recording-api';

let dbCount = 0;
const uniqueName = (): string => `humgauge-test-${process.pid}-${Date.now()}-${dbCount++}`;

/** A track of known truth: level rises at growthPerS (amplitude e-folding rate), holds, then decays. */
function makeTrack(p: { growthPerS: number; decayPerS: number; freqHz: number; framesPerS?: number; noiseDb?: number; seed?: number }): TrackFrame[] {
  const fps = p.framesPerS ?? 100;
  const rng = createRng(p.seed ?? 3);
  const dbPerNeper = 20 / Math.LN10;
  const out: TrackFrame[] = [];
  const add = (t: number, level: number, state: TrackFrame['state'], f: number): void => {
    out.push({ timeS: t, frequencyHz: f, amplitudeDbfs: level + (p.noiseDb ?? 0) * rng.normal(), levelDbfs: level - 3, state, isClipped: false, isAfterGap: false });
  };
  let i = 0;
  for (; i < fps * 1; i++) add(i / fps, -80, 'quiet', Number.NaN);
  const g0 = i;
  for (; i < g0 + fps * 2; i++) add(i / fps, -70 + dbPerNeper * p.growthPerS * ((i - g0) / fps), 'growth', p.freqHz);
  const top = -70 + dbPerNeper * p.growthPerS * 2;
  const s0 = i;
  for (; i < s0 + fps * 2; i++) add(i / fps, top, 'steady', p.freqHz);
  const d0 = i;
  for (; i < d0 + fps * 1; i++) add(i / fps, top - dbPerNeper * p.decayPerS * ((i - d0) / fps), 'decay', p.freqHz);
  return out;
}

const META: NewSessionMeta = { source: 'microphone', sampleRateHz: 8000, site: 'Bench rig B', equipment: 'Heated tube 1.2 m', keepAudio: true };

const restorers: (() => void)[] = [];
afterEach(() => {
  while (restorers.length) restorers.pop()?.();
});

/** Makes IDBObjectStore.put throw the browser's QuotaExceededError when `shouldFail` says so. */
function simulateQuota(shouldFail: (storeName: string, value: unknown) => boolean): void {
  const proto = IDBObjectStore.prototype;
  const original = proto.put;
  proto.put = function (this: IDBObjectStore, value: unknown, key?: IDBValidKey) {
    if (shouldFail(this.name, value)) throw new DOMException('The quota has been exceeded.', 'QuotaExceededError');
    return original.call(this, value, key);
  };
  restorers.push(() => {
    proto.put = original;
  });
}

describe('track column chunks', () => {
  it('round-trip every field exactly, NaN and infinities included', () => {
    const frames: TrackFrame[] = [
      { timeS: 0.01, frequencyHz: Number.NaN, amplitudeDbfs: -Infinity, levelDbfs: -96.3, state: 'quiet', isClipped: false, isAfterGap: true },
      { timeS: 0.02, frequencyHz: 171.23456789, amplitudeDbfs: -12.000000001, levelDbfs: 0.1 + 0.2, state: 'growth', isClipped: true, isAfterGap: false },
      { timeS: 1e-300, frequencyHz: 4000, amplitudeDbfs: 3, levelDbfs: Infinity, state: 'decay', isClipped: true, isAfterGap: true },
    ];
    // Float64Array holds IEEE 754 doubles: a JS number survives bit for bit (ECMA-262 §25.1, IEEE 754-2019).
    expect(unpackFrames([packFrames('x', 0, frames)])).toEqual(frames);
  });
});

describe('schema versions and migrations', () => {
  it('a new database opens at the current version with every store', async () => {
    const db = await openSessionDb({ name: uniqueName() });
    expect(db.version).toBe(DB_VERSION);
    expect([...db.objectStoreNames].sort()).toEqual(['audio', 'frames', 'sessions']);
    db.close();
  });

  it('migrates v1 records (flat metadata, inline track) to v2 without losing a frame', async () => {
    const name = uniqueName();
    const v1 = await openSessionDb({ name, version: 1 });
    expect(v1.version).toBe(1);
    const track = makeTrack({ growthPerS: 4, decayPerS: 5, freqHz: 170 });
    const older: SessionRecordV1 = { id: 'a', createdAtMs: 1000, site: 'Boiler room', equipment: 'Flue', notes: 'first', sampleRateHz: 44100, markers: [{ timeS: 1, kind: 'note', label: 'burner on' }], track, report: null, isComplete: true };
    const newer: SessionRecordV1 = { id: 'b', createdAtMs: 2000, site: 'Bench', equipment: 'Tube', notes: '', sampleRateHz: 48000, markers: [], track: track.slice(0, 10), report: null, isComplete: false };
    // Written through the raw API, as the v1 app did.
    const raw = v1 as unknown as { put(store: string, v: unknown): Promise<unknown> };
    await raw.put('sessions', older);
    await raw.put('sessions', newer);
    v1.close();

    const db = await openSessionDb({ name });
    expect(db.version).toBe(2);
    const a = await loadFullSession(db, 'a');
    expect(a?.record.meta).toMatchObject({ site: 'Boiler room', equipment: 'Flue', notes: 'first', sampleRateHz: 44100 });
    expect(a?.record.status).toBe('complete');
    expect(a?.record.markers).toEqual(older.markers);
    expect(a?.track).toEqual(track);
    expect(a?.record.frameCount).toBe(track.length);
    expect(a?.audio).toBeNull();
    // The unfinished v1 recording is handed to recovery.
    expect((await db.get('sessions', 'b'))?.status).toBe('interrupted');
    expect((await findInterruptedSessions(db)).map((r) => r.id)).toEqual(['b']);
    // The new indexes work on migrated data: newest first, search by site.
    expect((await listSessions(db)).map((r) => r.id)).toEqual(['b', 'a']);
    expect((await listSessions(db, { text: 'boiler' })).map((r) => r.id)).toEqual(['a']);
    db.close();
  });

  it('an old tab is closed on a version change and the upgrade does not deadlock', async () => {
    const name = uniqueName();
    let oldTabTold = 0;
    const oldTab = await openSessionDb({ name, version: 1, onVersionChange: () => oldTabTold++ });
    const newTab = await openSessionDb({ name });
    expect(newTab.version).toBe(2);
    expect(oldTabTold).toBe(1);
    newTab.close();
    void oldTab;
  });

  it('an old tab that ignores the change makes the new one report "blocked" (W3C IndexedDB: blocked event)', async () => {
    const name = uniqueName();
    // A connection that does not close on versionchange, as an old app version might.
    const stubborn = await openDB(name, 1, { upgrade: (d) => void d.createObjectStore('sessions', { keyPath: 'id' }) });
    let blocked = 0;
    const opening = openSessionDb({ name, onBlocked: () => blocked++ });
    await new Promise((r) => setTimeout(r, 50));
    expect(blocked).toBe(1);
    stubborn.close();
    const db = await opening;
    expect(db.version).toBe(2);
    db.close();
  });
});

describe('recording', () => {
  it('writes about once a second without being asked, and finish stores the report', async () => {
    const db = await openSessionDb({ name: uniqueName() });
    const rec = await createSessionRecorder(META, { db, flushIntervalMs: 40 });
    const track = makeTrack({ growthPerS: 3, decayPerS: 4, freqHz: 170 });
    rec.appendFrames(track.slice(0, 100));
    rec.appendAudio(new Float32Array(800).fill(0.25));
    await new Promise((r) => setTimeout(r, 150));
    // No flush() call: the timer wrote it.
    expect((await loadTrack(db, rec.id)).length).toBe(100);
    rec.appendFrames(track.slice(100));
    rec.addMarker({ timeS: 4, kind: 'driving-off', label: 'heater off' });
    const report = summariseTrack(track, 8000);
    await rec.finish(report);
    const full = await loadFullSession(db, rec.id);
    expect(full?.record.status).toBe('complete');
    expect(full?.track).toEqual(track);
    expect(full?.record.report).toEqual(report);
    expect(full?.record.markers).toHaveLength(1);
    expect(full?.audio?.length).toBe(800);
    db.close();
  });

  it('copies appended frames and blocks (the analysis reuses its buffers)', async () => {
    const db = await openSessionDb({ name: uniqueName() });
    const rec = await createSessionRecorder(META, { db, useTimer: false });
    const frame: TrackFrame = { timeS: 0.01, frequencyHz: 170, amplitudeDbfs: -20, levelDbfs: -20, state: 'steady', isClipped: false, isAfterGap: false };
    const block = new Float32Array([0.5, 0.5]);
    rec.appendFrames([frame]);
    rec.appendAudio(block);
    frame.timeS = 99;
    block[0] = -1;
    await rec.flush();
    expect((await loadTrack(db, rec.id))[0].timeS).toBe(0.01);
    expect((await loadAudio(db, rec.id))?.[0]).toBe(0.5);
    db.close();
  });

  it('an abandoned recording is found after the stale time and completed from its track', async () => {
    const db = await openSessionDb({ name: uniqueName() });
    let clock = 1_000_000;
    const rec = await createSessionRecorder({ ...META, keepAudio: false }, { db, useTimer: false, nowMs: () => clock });
    const track = makeTrack({ growthPerS: 3, decayPerS: 5, freqHz: 170 });
    rec.appendFrames(track);
    await rec.flush();
    // The tab dies here: no finish().
    expect(await findInterruptedSessions(db, clock + 1000)).toHaveLength(0);
    clock += STALE_RECORDING_MS + 1;
    const ids = await recoverInterruptedSessions(db, null, clock);
    expect(ids).toEqual([rec.id]);
    const r = await db.get('sessions', rec.id);
    expect(r?.status).toBe('recovered');
    expect(r?.history.join(' ')).toMatch(/interrupted/);
    // Truth of the synthetic track: growth 3 1/s, decay 5 1/s, exact straight lines in dB.
    expect(r?.report?.summary.growthRatePerS).toBeCloseTo(3, 6);
    expect(r?.report?.summary.decayRatePerS).toBeCloseTo(5, 6);
    expect(await findInterruptedSessions(db, clock)).toHaveLength(0);
    db.close();
  });

  it('recovery analyses the stored audio again when audio was kept', async () => {
    const db = await openSessionDb({ name: uniqueName() });
    let clock = 5_000_000;
    const rec = await createSessionRecorder(META, { db, useTimer: false, nowMs: () => clock });
    const blocks = [new Float32Array(1000).fill(0.1), new Float32Array(500).fill(-0.2)];
    for (const b of blocks) rec.appendAudio(b);
    await rec.flush();
    rec.appendAudio(new Float32Array(300).fill(0.3));
    await rec.flush();
    clock += STALE_RECORDING_MS + 1;
    let seen: Float32Array | null = null;
    const fake: Report = summariseTrack([], 8000);
    await recoverInterruptedSessions(db, async (audio) => {
      seen = audio;
      return fake;
    }, clock);
    expect(seen).not.toBeNull();
    const got = seen as unknown as Float32Array;
    expect(got.length).toBe(1800);
    expect([got[0], got[1000], got[1500], got[1799]].map((v) => Math.fround(v))).toEqual([Math.fround(0.1), Math.fround(-0.2), Math.fround(0.3), Math.fround(0.3)]);
    expect((await db.get('sessions', rec.id))?.history.join(' ')).toMatch(/stored audio/);
    db.close();
  });

  it('with Web Locks, a freed lock means abandoned at once and a held lock means alive, whatever the heartbeat', async () => {
    const db = await openSessionDb({ name: uniqueName() });
    const clock = 7_000_000;
    const a = await createSessionRecorder(META, { db, useTimer: false, nowMs: () => clock });
    const b = await createSessionRecorder(META, { db, useTimer: false, nowMs: () => clock });
    // a: its tab crashed a moment ago (lock freed by the browser); b: its tab is alive but idle for a minute.
    const live = async (id: string): Promise<boolean> => id === b.id;
    const ids = await recoverInterruptedSessions(db, null, clock + 500, live);
    expect(ids).toEqual([a.id]);
    expect(await recoverInterruptedSessions(db, null, clock + 60_000, live)).toEqual([]);
    expect((await db.get('sessions', b.id))?.status).toBe('recording');
    db.close();
  });

  it('a recording whose tab is alive (fresh heartbeat) is left alone', async () => {
    const db = await openSessionDb({ name: uniqueName() });
    const clock = 9_000_000;
    const rec = await createSessionRecorder(META, { db, useTimer: false, nowMs: () => clock });
    expect(await recoverInterruptedSessions(db, null, clock + STALE_RECORDING_MS - 1, async () => null)).toEqual([]);
    expect((await db.get('sessions', rec.id))?.status).toBe('recording');
    db.close();
  });
});

describe('storage full (QuotaExceededError)', () => {
  it('drops the audio, keeps the track, tells the user once, and damages nothing stored', async () => {
    const db = await openSessionDb({ name: uniqueName() });
    const rec = await createSessionRecorder(META, { db, useTimer: false });
    const problems: string[] = [];
    rec.onProblem((m) => problems.push(m));
    const first = new Float32Array(4000).map((_, i) => Math.sin(i / 10) * 0.5);
    rec.appendAudio(first);
    rec.appendFrames(makeTrack({ growthPerS: 3, decayPerS: 4, freqHz: 170 }).slice(0, 50));
    await rec.flush();
    simulateQuota((store) => store === 'audio');
    rec.appendAudio(new Float32Array(4000).fill(0.1));
    rec.appendFrames(makeTrack({ growthPerS: 3, decayPerS: 4, freqHz: 170 }).slice(50, 120));
    await rec.flush();
    expect(problems).toHaveLength(1);
    expect(problems[0]).toMatch(/Storage is full.*audio/);
    expect(rec.isKeepingAudio).toBe(false);
    rec.appendAudio(new Float32Array(10));
    rec.appendFrames(makeTrack({ growthPerS: 3, decayPerS: 4, freqHz: 170 }).slice(120, 200));
    await rec.finish(summariseTrack([], 8000));
    const full = await loadFullSession(db, rec.id);
    expect(full?.track).toHaveLength(200);
    // The audio stored before the disk filled is intact, sample for sample.
    expect(full?.audio).toEqual(first);
    expect(full?.record.audio).toMatchObject({ isKept: false, stoppedReason: 'storage full or failing', sampleCount: 4000 });
    expect(full?.record.status).toBe('complete');
    db.close();
  });

  it('when even the track is refused it is held in memory and written once space returns', async () => {
    const db = await openSessionDb({ name: uniqueName() });
    const rec = await createSessionRecorder({ ...META, keepAudio: false }, { db, useTimer: false });
    const problems: string[] = [];
    rec.onProblem((m) => problems.push(m));
    const track = makeTrack({ growthPerS: 3, decayPerS: 4, freqHz: 170 });
    rec.appendFrames(track.slice(0, 100));
    await rec.flush();
    let isFull = true;
    simulateQuota(() => isFull);
    rec.appendFrames(track.slice(100, 300));
    await rec.flush();
    expect(problems.join(' ')).toMatch(/track could not be saved/);
    expect(await loadTrack(db, rec.id)).toEqual(track.slice(0, 100));
    isFull = false;
    rec.appendFrames(track.slice(300));
    await rec.flush();
    expect(await loadTrack(db, rec.id)).toEqual(track);
    db.close();
  });
});

function fullSession(id: string, createdAtMs: number, site: string): FullSession {
  const track = makeTrack({ growthPerS: 2, decayPerS: 3, freqHz: 140, noiseDb: 0.2 });
  return {
    record: {
      id,
      createdAtMs,
      updatedAtMs: createdAtMs,
      heartbeatAtMs: createdAtMs,
      status: 'complete',
      meta: { source: 'file', sampleRateHz: 8000, site, equipment: 'Water heater', notes: 'after the fix' },
      markers: [{ timeS: 2, kind: 'setting', label: 'firing rate', value: 60, unit: '%' }],
      gaps: [],
      report: summariseTrack(track, 8000),
      durationS: 6,
      frameCount: track.length,
      frameChunkCount: 0,
      audio: { isKept: true, sampleCount: 0, chunkCount: 0 },
      siteKey: site.toLowerCase(),
      equipmentKey: 'water heater',
      history: [],
    },
    track,
    audio: new Float32Array(100_000).map((_, i) => Math.sin(i / 7) * 0.3),
  };
}

describe('transactions and editing', () => {
  it('a batch write is all or nothing', async () => {
    const db = await openSessionDb({ name: uniqueName() });
    let frameChunks = 0;
    // Fail in the middle of the second session's track.
    simulateQuota((store) => store === 'frames' && ++frameChunks > 9);
    await expect(putFullSessions(db, [fullSession('s1', 1, 'A'), fullSession('s2', 2, 'B')])).rejects.toThrow(/quota/i);
    expect(await db.count('sessions')).toBe(0);
    expect(await db.count('frames')).toBe(0);
    expect(await db.count('audio')).toBe(0);
    db.close();
  });

  it('delete then undo gives back the same session; edits update the search', async () => {
    const db = await openSessionDb({ name: uniqueName() });
    const s = fullSession('s1', Date.UTC(2026, 0, 5), 'Plant room');
    await putFullSessions(db, [s, fullSession('s2', Date.UTC(2026, 2, 1), 'Bench')]);
    const before = await loadFullSession(db, 's1');
    const deleted = await deleteSession(db, 's1');
    expect(await db.get('sessions', 's1')).toBeUndefined();
    expect(await loadTrack(db, 's1')).toEqual([]);
    await restoreSession(db, deleted!);
    expect(await loadFullSession(db, 's1')).toEqual(before);

    await updateSessionMeta(db, 's1', { site: 'Boiler house 2', notes: 'gasket replaced' });
    expect((await listSessions(db, { text: 'HOUSE' })).map((r) => r.id)).toEqual(['s1']);
    expect((await listSessions(db, { text: 'gasket' })).map((r) => r.id)).toEqual(['s1']);
    expect((await listSessions(db, { fromMs: Date.UTC(2026, 1, 1) })).map((r) => r.id)).toEqual(['s2']);
    expect((await listSessions(db)).map((r) => r.id)).toEqual(['s2', 's1']);
    db.close();
  });
});

describe('track summary (report completed without audio)', () => {
  it('recovers growth and decay rates of a noisy track and derives damping ratio and Q', () => {
    // 0.1 dB frame noise over 2 s at 100 frames/s: slope SE ≈ 0.1/sqrt(200·(2²/12)) ≈ 0.012 dB/s ≈ 0.0014 1/s,
    // over 1 s of decay ≈ 0.004 1/s; tolerances of 0.02 1/s are > 5 SE.
    const track = makeTrack({ growthPerS: 8.1, decayPerS: 5, freqHz: 170, noiseDb: 0.1, seed: 11 });
    const r = summariseTrack(track, 48000);
    expect(Math.abs((r.summary.growthRatePerS ?? 0) - 8.1)).toBeLessThan(0.02);
    expect(Math.abs((r.summary.decayRatePerS ?? 0) - 5)).toBeLessThan(0.02);
    const [lo, hi] = r.summary.growthRateCi95PerS ?? [0, 0];
    expect(lo).toBeLessThan(8.1 + 0.02);
    expect(hi).toBeGreaterThan(8.1 - 0.02);
    // REFERENCES.md §5: zeta = alpha/wd = 4.681027e-3 and Q = wd/(2 alpha) = 106.8142 for f = 170 Hz, alpha = 5.
    const exact = summariseTrack(makeTrack({ growthPerS: 8.1, decayPerS: 5, freqHz: 170 }), 48000);
    expect(exact.summary.dampingRatio).toBeCloseTo(4.681027e-3, 8);
    expect(exact.summary.qFactor).toBeCloseTo(106.8142, 3);
    expect(r.onsets).toHaveLength(1);
    expect(r.onsets[0].timeS).toBeCloseTo(1, 6);
    expect(r.warnings?.[0]).toMatch(/too narrow/);
  });

  it('an hour costs the column layout: 34 bytes a frame, 4 bytes an audio sample', () => {
    // 100 frames/s, 48 kHz: 3600 × (100 × 34 + 48000 × 4) = 703 440 000 bytes (definition of the layout).
    expect(hourCostBytes(100, 48000)).toBe(703_440_000);
    expect(hourCostBytes(100, 0)).toBe(12_240_000);
  });
});
