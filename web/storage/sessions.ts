/**
 * Reading, editing, deleting (with undo) and recovering stored sessions. Every multi-store change
 * runs in one IndexedDB transaction, so it lands whole or not at all.
 */
import type { Marker, Report, TrackFrame } from '../../dsp/types';
import {
  BYTES_PER_AUDIO_SAMPLE,
  BYTES_PER_FRAME,
  openSessionDb,
  packFrames,
  unpackFrames,
  type AudioChunk,
  type FrameChunk,
  type SessionDb,
  type SessionMeta,
  type SessionRecord,
} from './db';
import { summariseTrack } from './track-summary';

/** A session with its track and (when kept) its audio, as exported and imported. */
export interface FullSession {
  record: SessionRecord;
  track: TrackFrame[];
  audio: Float32Array | null;
}

let shared: Promise<SessionDb> | null = null;
let versionChangeHandler: (() => void) | null = null;
let blockedHandler: (() => void) | null = null;

/** Tells the app when another tab needs a newer database (this tab's connection is closed). */
export function onDatabaseVersionChange(fn: () => void): void {
  versionChangeHandler = fn;
}
/** Tells the app when an older tab holds the database open and the upgrade waits for it. */
export function onDatabaseBlocked(fn: () => void): void {
  blockedHandler = fn;
}

/** The app's shared connection (opened once, and again after the browser closed it). */
export function getSessionDb(): Promise<SessionDb> {
  if (!shared) {
    shared = openSessionDb({
      onBlocked: () => blockedHandler?.(),
      onVersionChange: () => {
        shared = null;
        versionChangeHandler?.();
      },
      onTerminated: () => {
        shared = null;
      },
    });
    shared.catch(() => {
      shared = null;
    });
  }
  return shared;
}

/** A fresh session id (random UUID). */
export function newSessionId(): string {
  return globalThis.crypto.randomUUID();
}

export interface SessionQuery {
  /** Matches site, equipment or notes (case-insensitive substring). */
  text?: string;
  /** Created at or after / before, ms since 1970. */
  fromMs?: number;
  toMs?: number;
}

/** Sessions, newest first, filtered by text (site, equipment, notes) and creation date. */
export async function listSessions(db: SessionDb, query: SessionQuery = {}): Promise<SessionRecord[]> {
  const text = (query.text ?? '').trim().toLowerCase();
  const range =
    query.fromMs !== undefined || query.toMs !== undefined
      ? IDBKeyRange.bound(query.fromMs ?? -Infinity, query.toMs ?? Infinity)
      : undefined;
  const out: SessionRecord[] = [];
  let cursor = await db.transaction('sessions').store.index('by-created').openCursor(range, 'prev');
  while (cursor) {
    const r = cursor.value;
    if (!text || r.siteKey.includes(text) || r.equipmentKey.includes(text) || r.meta.notes.toLowerCase().includes(text)) out.push(r);
    cursor = await cursor.continue();
  }
  return out;
}

export function getSession(db: SessionDb, id: string): Promise<SessionRecord | undefined> {
  return db.get('sessions', id);
}

/** The stored track of a session, in time order. */
export async function loadTrack(db: SessionDb, id: string): Promise<TrackFrame[]> {
  const chunks = await db.getAll('frames', IDBKeyRange.bound([id, -Infinity], [id, Infinity]));
  return unpackFrames(chunks);
}

/** The stored raw audio as one array, or null when none was kept. */
export async function loadAudio(db: SessionDb, id: string): Promise<Float32Array | null> {
  const chunks = await db.getAll('audio', IDBKeyRange.bound([id, -Infinity], [id, Infinity]));
  if (chunks.length === 0) return null;
  let n = 0;
  for (const c of chunks) n = Math.max(n, c.startSample + c.samples.length);
  const out = new Float32Array(n);
  for (const c of chunks) out.set(c.samples, c.startSample);
  return out;
}

export async function loadFullSession(db: SessionDb, id: string): Promise<FullSession | undefined> {
  const record = await getSession(db, id);
  if (!record) return undefined;
  return { record, track: await loadTrack(db, id), audio: await loadAudio(db, id) };
}

export type MetaPatch = Partial<Pick<SessionMeta, 'site' | 'equipment' | 'notes' | 'geometry' | 'calibrationOffsetDb' | 'calibrationSource'>>;

/** Edits metadata and notes; returns the updated record. */
export async function updateSessionMeta(db: SessionDb, id: string, patch: MetaPatch, nowMs = Date.now()): Promise<SessionRecord> {
  const tx = db.transaction('sessions', 'readwrite');
  const rec = await tx.store.get(id);
  if (!rec) throw new Error(`No session with id ${id}`);
  const meta: SessionMeta = { ...rec.meta, ...patch };
  const next: SessionRecord = { ...rec, meta, updatedAtMs: nowMs, siteKey: meta.site.toLowerCase(), equipmentKey: meta.equipment.toLowerCase() };
  await tx.store.put(next);
  await tx.done;
  return next;
}

/** Replaces the markers of a session (after editing control values). */
export async function updateSessionMarkers(db: SessionDb, id: string, markers: Marker[], nowMs = Date.now()): Promise<void> {
  const tx = db.transaction('sessions', 'readwrite');
  const rec = await tx.store.get(id);
  if (!rec) throw new Error(`No session with id ${id}`);
  await tx.store.put({ ...rec, markers, updatedAtMs: nowMs });
  await tx.done;
}

/**
 * Replaces the report and markers of a session after a re-analysis of its stored audio (the
 * track recorded live stays as it was), and notes it in the session's history.
 */
export async function replaceSessionReport(db: SessionDb, id: string, report: Report, markers: Marker[], note: string, nowMs = Date.now()): Promise<SessionRecord> {
  const tx = db.transaction('sessions', 'readwrite');
  const rec = await tx.store.get(id);
  if (!rec) throw new Error(`No session with id ${id}`);
  const next: SessionRecord = { ...rec, report, markers, durationS: report.durationS, updatedAtMs: nowMs, history: [...rec.history, note] };
  await tx.store.put(next);
  await tx.done;
  return next;
}

/** Everything removed by a delete, kept in memory so the delete can be undone. */
export interface DeletedSession {
  record: SessionRecord;
  frames: FrameChunk[];
  audio: AudioChunk[];
}

/** Deletes a session with its track and audio in one transaction; returns what undo needs. */
export async function deleteSession(db: SessionDb, id: string): Promise<DeletedSession | undefined> {
  const tx = db.transaction(['sessions', 'frames', 'audio'], 'readwrite');
  const range = IDBKeyRange.bound([id, -Infinity], [id, Infinity]);
  const record = await tx.objectStore('sessions').get(id);
  if (!record) {
    await tx.done;
    return undefined;
  }
  const frames = await tx.objectStore('frames').getAll(range);
  const audio = await tx.objectStore('audio').getAll(range);
  await tx.objectStore('frames').delete(range);
  await tx.objectStore('audio').delete(range);
  await tx.objectStore('sessions').delete(id);
  await tx.done;
  return { record, frames, audio };
}

/** Puts a deleted session back exactly as it was. */
export async function restoreSession(db: SessionDb, deleted: DeletedSession): Promise<void> {
  const tx = db.transaction(['sessions', 'frames', 'audio'], 'readwrite');
  await tx.objectStore('sessions').put(deleted.record);
  for (const f of deleted.frames) await tx.objectStore('frames').put(f);
  for (const a of deleted.audio) await tx.objectStore('audio').put(a);
  await tx.done;
}

/** Frames per stored chunk when a whole session is written at once (import). */
const FRAMES_PER_CHUNK = 100;
/** Audio samples per stored chunk when a whole session is written at once. */
const SAMPLES_PER_CHUNK = 48_000;

/**
 * Writes several complete sessions in one transaction: all of them land or none does.
 * Existing records with the same id are replaced only when `replace` is set.
 */
export async function putFullSessions(db: SessionDb, sessions: readonly FullSession[]): Promise<void> {
  const tx = db.transaction(['sessions', 'frames', 'audio'], 'readwrite');
  try {
    for (const s of sessions) {
      const id = s.record.id;
      const range = IDBKeyRange.bound([id, -Infinity], [id, Infinity]);
      await tx.objectStore('frames').delete(range);
      await tx.objectStore('audio').delete(range);
      let seq = 0;
      for (let i = 0; i < s.track.length; i += FRAMES_PER_CHUNK) {
        await tx.objectStore('frames').put(packFrames(id, seq++, s.track.slice(i, i + FRAMES_PER_CHUNK)));
      }
      const frameChunkCount = seq;
      let audioChunks = 0;
      if (s.audio) {
        for (let i = 0; i < s.audio.length; i += SAMPLES_PER_CHUNK) {
          await tx.objectStore('audio').put({ sessionId: id, seq: audioChunks++, startSample: i, samples: s.audio.slice(i, i + SAMPLES_PER_CHUNK) });
        }
      }
      await tx.objectStore('sessions').put({
        ...s.record,
        frameCount: s.track.length,
        frameChunkCount,
        audio: { ...s.record.audio, sampleCount: s.audio?.length ?? 0, chunkCount: audioChunks },
      });
    }
  } catch (err) {
    // Abandon the whole transaction: nothing of it stays.
    try {
      tx.abort();
    } catch {
      /* already finished */
    }
    await tx.done.catch(() => undefined);
    throw err;
  }
  await tx.done;
}

/** A recording whose tab has not written for this long is taken as abandoned, ms (when Web Locks are missing). */
export const STALE_RECORDING_MS = 10_000;

/** Name of the Web Lock a recording tab holds for as long as it records the session. */
export function recordingLockName(id: string): string {
  return `humgauge-recording-${id}`;
}

/** Whether a tab is still recording a session: true alive, false abandoned, null cannot tell. */
export type LiveCheck = (id: string) => Promise<boolean | null>;

/**
 * Asks the Web Locks API whether some tab holds the session's recording lock. The browser frees
 * the locks of a closed or crashed tab at once, so this tells an abandoned recording immediately.
 */
export const webLockLiveCheck: LiveCheck = async (id) => {
  const locks = typeof navigator !== 'undefined' ? navigator.locks : undefined;
  if (!locks) return null;
  try {
    return await locks.request(recordingLockName(id), { ifAvailable: true }, async (lock) => lock === null);
  } catch {
    return null;
  }
};

/**
 * Recordings of this device left in 'recording' by a closed tab or a crash: no tab holds their
 * recording lock (or, without Web Locks, no heartbeat for STALE_RECORDING_MS); plus those already
 * marked interrupted. Only sessions this device recorded count (`isLocalRecording`); an imported
 * session is what its author exported and is never rewritten. (Status 'recording' comes only from
 * this device's recorder, the import refuses it, so such records from before the marker count too.)
 */
export async function findInterruptedSessions(db: SessionDb, nowMs = Date.now(), liveCheck: LiveCheck = webLockLiveCheck): Promise<SessionRecord[]> {
  const recording = await db.getAllFromIndex('sessions', 'by-status', 'recording');
  const interrupted = (await db.getAllFromIndex('sessions', 'by-status', 'interrupted')).filter((r) => r.isLocalRecording === true);
  const abandoned: SessionRecord[] = [];
  for (const r of recording) {
    const alive = await liveCheck(r.id);
    if (alive === false || (alive === null && nowMs - r.heartbeatAtMs > STALE_RECORDING_MS)) abandoned.push(r);
  }
  return [...abandoned, ...interrupted];
}

/**
 * How far the stored track may run past the stored audio, s, with the audio still taken as
 * covering it: two write intervals (frames of the last block can land one write after its audio).
 */
const AUDIO_TRACK_SLACK_S = 2;

/** How to analyse: the user's markers, and the band (Hz) when not the analysis's default. */
export interface StoredAnalysisOptions {
  markers: readonly Marker[];
  bandLowHz?: number;
  bandHighHz?: number;
}

/** Re-analyses stored audio into a report (the streaming analysis of dsp/). Null when not possible. */
export type AudioAnalyser = (audio: Float32Array, sampleRateHz: number, options: StoredAnalysisOptions) => Promise<Report | null>;

/**
 * Completes interrupted sessions from what was stored: the analysis runs again over the stored
 * audio when there is audio and an analyser, else the stored track is summarised. Each session is
 * marked 'recovered' with a note in its history. Returns the ids completed.
 */
export async function recoverInterruptedSessions(db: SessionDb, analyse: AudioAnalyser | null, nowMs = Date.now(), liveCheck: LiveCheck = webLockLiveCheck): Promise<string[]> {
  const done: string[] = [];
  for (const rec of await findInterruptedSessions(db, nowMs, liveCheck)) {
    // Hold the session's recording lock while completing it, so a second tab starting at the same
    // moment finds it taken and leaves it alone.
    const isDone = await whileHoldingRecordingLock(rec.id, () => completeOne(db, rec.id, analyse, nowMs));
    if (isDone) done.push(rec.id);
  }
  return done;
}

/** Runs fn while holding the session's recording lock (Web Locks); false without running it when another tab holds it. */
async function whileHoldingRecordingLock(id: string, fn: () => Promise<boolean>): Promise<boolean> {
  const locks = typeof navigator !== 'undefined' ? navigator.locks : undefined;
  if (!locks) return fn();
  return locks.request(recordingLockName(id), { ifAvailable: true }, async (lock) => (lock ? fn() : false));
}

/** Completes one interrupted session from its stored audio or track; false when it needs nothing. */
async function completeOne(db: SessionDb, id: string, analyse: AudioAnalyser | null, nowMs: number): Promise<boolean> {
  const mark = db.transaction('sessions', 'readwrite');
  const fresh = await mark.store.get(id);
  if (!fresh || (fresh.status !== 'recording' && !(fresh.status === 'interrupted' && fresh.isLocalRecording === true))) {
    await mark.done;
    return false;
  }
  await mark.store.put({ ...fresh, status: 'interrupted', updatedAtMs: nowMs });
  await mark.done;

  const track = await loadTrack(db, id);
  const audio = await loadAudio(db, id);
  const last = track.length ? track[track.length - 1].timeS : 0;
  const audioS = audio ? audio.length / fresh.meta.sampleRateHz : 0;
  // Audio and track are written together about once a second, so stored audio normally ends
  // with the track; when it stopped earlier (storage full) the track is the fuller record.
  const audioCoversTrack = audioS >= last - AUDIO_TRACK_SLACK_S;
  let report: Report | null = null;
  let how = '';
  if (audio && audio.length > 0 && analyse && audioCoversTrack) {
    try {
      report = await analyse(audio, fresh.meta.sampleRateHz, { markers: fresh.markers });
      if (report) how = `analysed again from ${audioS.toFixed(1)} s of stored audio`;
    } catch {
      report = null;
    }
  }
  if (!report) {
    report = summariseTrack(track, fresh.meta.sampleRateHz);
    how = `summarised from ${track.length} stored track frames (${last.toFixed(1)} s)`;
    if (audioS > 0) how += audioCoversTrack ? `; the ${audioS.toFixed(1)} s of stored audio could not be analysed` : `, which run longer than the ${audioS.toFixed(1)} s of stored audio`;
  }
  const tx = db.transaction('sessions', 'readwrite');
  const cur = await tx.store.get(id);
  if (cur) {
    await tx.store.put({
      ...cur,
      status: 'recovered',
      report,
      durationS: Math.max(cur.durationS, last, audioS),
      updatedAtMs: nowMs,
      history: [...cur.history, `Recording was interrupted; completed on ${new Date(nowMs).toISOString()}, ${how}.`],
    });
  }
  await tx.done;
  return true;
}

/** Space figures for the storage panel, bytes. */
export interface StorageFigures {
  usedBytes: number | null;
  quotaBytes: number | null;
  isPersisted: boolean | null;
  /** What one hour costs with the track only and with raw audio at `sampleRateHz`. */
  hourTrackOnlyBytes: number;
  hourWithAudioBytes: number;
}

/**
 * Storage use and the cost of an hour of recording: track frames at `framesPerS` and, with audio,
 * float32 samples at `sampleRateHz` (the layout of db.ts; IndexedDB adds a little per record).
 */
export async function storageFigures(framesPerS: number, sampleRateHz: number): Promise<StorageFigures> {
  const sm = typeof navigator !== 'undefined' ? navigator.storage : undefined;
  let usedBytes: number | null = null;
  let quotaBytes: number | null = null;
  let isPersisted: boolean | null = null;
  try {
    const est = await sm?.estimate();
    usedBytes = est?.usage ?? null;
    quotaBytes = est?.quota ?? null;
    isPersisted = sm?.persisted ? await sm.persisted() : null;
  } catch {
    /* the figures stay unknown */
  }
  const hourTrackOnlyBytes = hourCostBytes(framesPerS, 0);
  return { usedBytes, quotaBytes, isPersisted, hourTrackOnlyBytes, hourWithAudioBytes: hourCostBytes(framesPerS, sampleRateHz) };
}

/** Bytes one hour of recording takes: frames at framesPerS, plus float32 audio at sampleRateHz (0: none). */
export function hourCostBytes(framesPerS: number, sampleRateHz: number): number {
  return 3600 * (framesPerS * BYTES_PER_FRAME + sampleRateHz * BYTES_PER_AUDIO_SAMPLE);
}

/** Asks the browser to keep our storage under pressure (navigator.storage.persist). */
export async function requestPersistentStorage(): Promise<boolean | null> {
  try {
    const sm = typeof navigator !== 'undefined' ? navigator.storage : undefined;
    if (!sm?.persist) return null;
    return await sm.persist();
  } catch {
    return null;
  }
}
