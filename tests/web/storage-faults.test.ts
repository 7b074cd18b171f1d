// Storage faults: a disk that fills or fails while recording, connections the browser closes,
// and sessions that must never be taken for this device's own interrupted recordings.
import 'fake-indexeddb/auto';
import { afterEach, describe, expect, it } from 'vitest';
import type { TrackFrame } from '../../dsp/types';
import { openSessionDb, type SessionDb } from '../../web/storage/db';
import { buildBundle } from '../../web/storage/export';
import { importBundle } from '../../web/storage/import';
import { createSessionRecorder } from '../../web/storage/recorder';
import type { NewSessionMeta } from '../../web/storage/recording-api';
import { findInterruptedSessions, loadAudio, loadFullSession, loadTrack, recoverInterruptedSessions } from '../../web/storage/sessions';
import { summariseTrack } from '../../web/storage/track-summary';
import { sampleSession, sampleTrack } from './export-sample';

let dbCount = 0;
const freshDb = (): Promise<SessionDb> => openSessionDb({ name: `humgauge-faults-${process.pid}-${Date.now()}-${dbCount++}` });
const META: NewSessionMeta = { source: 'microphone', sampleRateHz: 8000, site: 'Boiler room', equipment: 'Wall-hung boiler', keepAudio: true };
/** Nobody holds any recording lock: every recording left is abandoned (a crashed tab). */
const noTabAlive = async (): Promise<boolean> => false;

const restorers: (() => void)[] = [];
afterEach(() => {
  while (restorers.length) restorers.pop()?.();
});

/**
 * The ways a browser reports a write it cannot make (Chromium's IndexedDB on a full disk fails
 * with "Failed to write blobs"; the standard names QuotaExceededError; UnknownError covers the
 * rest; a transaction may also just abort). `how` chooses one; `when` picks the writes hit.
 */
type Fault = 'QuotaExceededError' | 'UnknownError' | 'IOError' | 'abort';
function injectFault(how: Fault, when: (storeName: string) => boolean): void {
  const proto = IDBObjectStore.prototype;
  const original = proto.put;
  proto.put = function (this: IDBObjectStore, value: unknown, key?: IDBValidKey) {
    if (!when(this.name)) return original.call(this, value, key);
    if (how === 'abort') {
      // The request is accepted, then the whole transaction aborts (the browser gave up on it).
      const req = original.call(this, value, key);
      this.transaction.abort();
      return req;
    }
    throw new DOMException(how === 'QuotaExceededError' ? 'The quota has been exceeded.' : 'Failed to write blobs', how);
  };
  restorers.push(() => {
    proto.put = original;
  });
}

const tone = (n: number, amplitude: number): Float32Array => new Float32Array(n).map((_, i) => amplitude * Math.sin(i / 9));

describe('every write failure is taken as possible storage pressure', () => {
  for (const how of ['QuotaExceededError', 'UnknownError', 'IOError', 'abort'] as const) {
    it(`${how} on the audio: audio dropped, track and report kept, the user told once in plain words`, async () => {
      const db = await freshDb();
      const rec = await createSessionRecorder(META, { db, useTimer: false });
      const problems: string[] = [];
      rec.onProblem((m) => problems.push(m));
      const track = sampleTrack(7, 8);
      const first = tone(4000, 0.4);
      rec.appendAudio(first);
      rec.appendFrames(track.slice(0, 300));
      await rec.flush();
      injectFault(how, (store) => store === 'audio');
      rec.appendAudio(tone(4000, 0.1));
      rec.appendFrames(track.slice(300, 600));
      await rec.flush();
      rec.appendAudio(tone(4000, 0.1));
      rec.appendFrames(track.slice(600));
      await rec.flush();
      expect(rec.isKeepingAudio).toBe(false);
      expect(problems).toHaveLength(1);
      expect(problems[0]).toMatch(/audio is no longer kept/);
      expect(problems[0]).toMatch(/track, the markers and the report are still being saved/);
      const report = summariseTrack(track, 8000);
      await rec.finish(report);
      const full = await loadFullSession(db, rec.id);
      expect(full?.track).toEqual(track);
      // The audio stored before the failure is intact, sample for sample.
      expect(full?.audio).toEqual(first);
      expect(full?.record).toMatchObject({ status: 'complete', report, audio: { isKept: false, sampleCount: 4000 } });
      expect(full?.record.audio.stoppedReason).toMatch(/storage/);
      db.close();
    });
  }

  it('a failing track write drops the audio at once and keeps the frames in memory until a write succeeds', async () => {
    const db = await freshDb();
    const rec = await createSessionRecorder(META, { db, useTimer: false });
    const problems: string[] = [];
    rec.onProblem((m) => problems.push(m));
    const track = sampleTrack(8, 8);
    rec.appendFrames(track.slice(0, 100));
    rec.appendAudio(tone(1000, 0.2));
    await rec.flush();
    let isFailing = true;
    injectFault('IOError', () => isFailing);
    rec.appendFrames(track.slice(100, 400));
    rec.appendAudio(tone(8000, 0.2));
    await rec.flush();
    expect(rec.isKeepingAudio).toBe(false);
    expect(problems.join(' ')).toMatch(/track could not be saved just now/);
    expect(await loadTrack(db, rec.id)).toEqual(track.slice(0, 100));
    isFailing = false;
    rec.appendFrames(track.slice(400));
    await rec.finish(summariseTrack(track, 8000));
    expect(await loadTrack(db, rec.id)).toEqual(track);
    expect((await loadAudio(db, rec.id))?.length).toBe(1000);
    db.close();
  });

  it('when the report itself cannot be written, the session\'s audio is given up to make room for it', async () => {
    const db = await freshDb();
    const rec = await createSessionRecorder(META, { db, useTimer: false });
    const problems: string[] = [];
    rec.onProblem((m) => problems.push(m));
    const track = sampleTrack(9, 8);
    rec.appendFrames(track);
    rec.appendAudio(tone(24_000, 0.3));
    await rec.flush();
    // The disk is full: a session record fails to be written until some space is freed.
    let hasFreed = false;
    const proto = IDBObjectStore.prototype;
    const original = proto.delete;
    proto.delete = function (this: IDBObjectStore, key: IDBValidKey | IDBKeyRange) {
      if (this.name === 'audio') hasFreed = true;
      return original.call(this, key);
    };
    restorers.push(() => {
      proto.delete = original;
    });
    injectFault('IOError', (store) => store === 'sessions' && !hasFreed);
    const report = summariseTrack(track, 8000);
    await rec.finish(report);
    const full = await loadFullSession(db, rec.id);
    expect(full?.record.status).toBe('complete');
    expect(full?.record.report).toEqual(report);
    expect(full?.track).toEqual(track);
    expect(full?.audio).toBeNull();
    expect(full?.record.audio).toMatchObject({ isKept: false, sampleCount: 0, chunkCount: 0 });
    expect(problems.join(' ')).toMatch(/raw audio of this session was removed to save its report/);
    db.close();
  });

  it('a connection the browser closed after a failure is opened again for the next write', async () => {
    const name = `humgauge-faults-reopen-${process.pid}-${Date.now()}`;
    let db = await openSessionDb({ name });
    const rec = await createSessionRecorder({ ...META, keepAudio: false }, { db, connect: async () => db, useTimer: false });
    const track = sampleTrack(10, 8);
    rec.appendFrames(track.slice(0, 200));
    await rec.flush();
    // The browser closes the connection (as Chromium does after an I/O error on its backing store).
    db.close();
    rec.appendFrames(track.slice(200, 500));
    await rec.flush();
    db = await openSessionDb({ name });
    rec.appendFrames(track.slice(500));
    await rec.finish(summariseTrack(track, 8000));
    expect(await loadTrack(db, rec.id)).toEqual(track);
    expect((await db.get('sessions', rec.id))?.status).toBe('complete');
    db.close();
  });
});

describe('recovery uses whatever is stored', () => {
  it('when the audio stopped early (storage full), the report comes from the stored track, which covers the whole recording', async () => {
    const db = await freshDb();
    let clock = 2_000_000;
    const rec = await createSessionRecorder(META, { db, useTimer: false, nowMs: () => clock });
    const track = sampleTrack(11, 8);
    rec.appendFrames(track.slice(0, 150));
    rec.appendAudio(tone(12_000, 0.2));
    await rec.flush();
    injectFault('QuotaExceededError', (store) => store === 'audio');
    for (let k = 150; k < track.length; k += 100) {
      rec.appendFrames(track.slice(k, k + 100));
      rec.appendAudio(tone(8000, 0.2));
      await rec.flush();
    }
    // The tab dies: no finish().
    clock += 60_000;
    let analysed = false;
    const ids = await recoverInterruptedSessions(db, async () => {
      analysed = true;
      return null;
    }, clock, noTabAlive);
    expect(ids).toEqual([rec.id]);
    const r = (await db.get('sessions', rec.id))!;
    expect(r.status).toBe('recovered');
    // The stored audio covers 1.5 s of an 8 s track: the track is the fuller record.
    expect(analysed).toBe(false);
    expect(r.report).toEqual(summariseTrack(track, 8000));
    expect(r.history.join(' ')).toMatch(/800 stored track frames.*1\.5 s of stored audio/);
    db.close();
  });
});

describe('only this device\'s own recordings are recovered', () => {
  it('an imported session marked interrupted (exported while still recording) is never taken for a crashed recording', async () => {
    const db = await freshDb();
    const s = sampleSession({ id: 'c0ffee00-1111-2222-3333-444455556666' });
    s.record.status = 'recording';
    await importBundle(db, buildBundle([s], Date.UTC(2026, 10, 21)));
    const before = await db.get('sessions', s.record.id);
    expect(before?.status).toBe('interrupted');
    expect(await findInterruptedSessions(db, Date.UTC(2030, 0, 1), noTabAlive)).toEqual([]);
    expect(await recoverInterruptedSessions(db, async () => null, Date.UTC(2030, 0, 1), noTabAlive)).toEqual([]);
    expect(await db.get('sessions', s.record.id)).toEqual(before);
    db.close();
  });

  it('a recording this device started and never finished is recovered', async () => {
    const db = await freshDb();
    const clock = 3_000_000;
    const rec = await createSessionRecorder({ ...META, keepAudio: false }, { db, useTimer: false, nowMs: () => clock });
    const track: TrackFrame[] = sampleTrack(12, 8);
    rec.appendFrames(track);
    await rec.flush();
    expect(await recoverInterruptedSessions(db, null, clock + 60_000, noTabAlive)).toEqual([rec.id]);
    db.close();
  });
});
