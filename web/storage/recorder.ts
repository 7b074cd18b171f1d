/**
 * Crash-safe recording of a session: the track, markers, gaps and (optionally) raw audio are kept
 * in memory for about a second and then written to IndexedDB, so a closed tab, a crash or a flat
 * battery loses at most a couple of seconds. When storage is full or failing the audio is dropped
 * first; the track and the report keep being saved, and the user is told.
 */
import type { Marker, Report, TrackFrame } from '../../dsp/types';
import { packFrames, type SessionDb, type SessionRecord } from './db';
import type { NewSessionMeta, SessionRecorder } from './recording-api';
import { getSessionDb, newSessionId, recordingLockName, requestPersistentStorage } from './sessions';
import { abandon } from './audio-writer';
import { createAudioSink, type AudioSink } from './off-thread';

/** Interval between writes, ms ("about once a second"). */
export const FLUSH_INTERVAL_MS = 1000;
/** Track frames held in memory while storage refuses them (about 10 minutes at 100 frames/s). */
const MAX_PENDING_FRAMES = 60_000;
/** Shortest interval between two repeats of the "track not saved" message, ms. */
const TRACK_PROBLEM_REPEAT_MS = 30_000;

export interface RecorderOptions {
  db?: SessionDb;
  /**
   * The connection to write with, asked before every write, so one the browser closed after a
   * failure is replaced (default: the app's shared connection, or `db` when given).
   */
  connect?: () => Promise<SessionDb>;
  flushIntervalMs?: number;
  /** Clock, ms since 1970 (tests pass a fake one). */
  nowMs?: () => number;
  /** Set to false to flush only when asked (tests). */
  useTimer?: boolean;
}

/** The recorder with two extra handles for the app and the tests. */
export interface StoredSessionRecorder extends SessionRecorder {
  /** Writes what is pending now; resolves when it is on disk (or failed and was reported). */
  flush(): Promise<void>;
  /** False once audio is no longer kept (not asked for, or storage full). */
  readonly isKeepingAudio: boolean;
}

/** What the browser said, in a few words for the user. */
function describeFailure(err: unknown): string {
  if (typeof err === 'object' && err !== null) {
    const { name, message } = err as { name?: unknown; message?: unknown };
    const text = [name, message].filter((x) => typeof x === 'string' && x).join(': ');
    if (text) return `the browser said “${text.slice(0, 160)}”`;
  }
  return `the browser said “${String(err).slice(0, 160)}”`;
}

const msgAudioDropped = (err: unknown): string =>
  `Storage is full or failing (${describeFailure(err)}): the raw audio is no longer kept for this session. The track, the markers and the report are still being saved.`;
const msgTrackFailed = (err: unknown): string =>
  `Storage is full or failing (${describeFailure(err)}): the track could not be saved just now; it is held in memory and saving will be tried again. Free some space: export, then delete old sessions.`;
const MSG_AUDIO_REMOVED = 'Storage is full: the raw audio of this session was removed to save its report. The track, the markers and the report are saved.';

function cleanSettings(settings: Record<string, unknown> | undefined): Record<string, string | number | boolean> | undefined {
  if (!settings) return undefined;
  const out: Record<string, string | number | boolean> = {};
  for (const [k, v] of Object.entries(settings)) {
    if (typeof v === 'string' || typeof v === 'boolean' || (typeof v === 'number' && Number.isFinite(v))) out[k] = v;
  }
  return out;
}

/**
 * Creates the session record and returns its recorder (the app uses startSessionRecording).
 *
 * Every write failure is taken as possible storage pressure, whatever the browser calls it
 * (QuotaExceededError, UnknownError "Failed to write blobs", an aborted transaction, a closed
 * connection): the track, markers and report are small and written first, each flush in its own
 * transaction; the audio follows in a second one and is the first thing given up.
 */
export async function createSessionRecorder(meta: NewSessionMeta, opts: RecorderOptions = {}): Promise<StoredSessionRecorder> {
  const fixedDb = opts.db;
  const connect = opts.connect ?? (fixedDb ? async () => fixedDb : getSessionDb);
  const now = opts.nowMs ?? (() => Date.now());
  const t0 = now();
  const id = newSessionId();
  // Hold the session's Web Lock while recording: the browser frees it when the tab closes or
  // crashes, which is how the next start knows the recording was interrupted.
  let releaseLock: () => void = () => undefined;
  const locks = typeof navigator !== 'undefined' ? navigator.locks : undefined;
  if (locks) {
    await new Promise<void>((granted) => {
      void locks
        .request(recordingLockName(id), () => {
          granted();
          return new Promise<void>((release) => {
            releaseLock = release;
          });
        })
        .catch(() => granted());
    });
  }
  let record: SessionRecord = {
    id,
    createdAtMs: t0,
    updatedAtMs: t0,
    heartbeatAtMs: t0,
    status: 'recording',
    isLocalRecording: true,
    meta: {
      source: meta.source,
      ...(meta.fileName !== undefined ? { fileName: meta.fileName } : {}),
      sampleRateHz: meta.sampleRateHz,
      site: meta.site ?? '',
      equipment: meta.equipment ?? '',
      notes: meta.notes ?? '',
      ...(meta.geometry ? { geometry: meta.geometry } : {}),
      ...(meta.calibrationOffsetDb !== undefined ? { calibrationOffsetDb: meta.calibrationOffsetDb } : {}),
      ...(meta.calibrationSource !== undefined ? { calibrationSource: meta.calibrationSource } : {}),
      ...(meta.captureSettings ? { captureSettings: cleanSettings(meta.captureSettings) } : {}),
    },
    markers: [],
    gaps: [],
    report: null,
    durationS: 0,
    frameCount: 0,
    frameChunkCount: 0,
    audio: { isKept: meta.keepAudio, sampleCount: 0, chunkCount: 0 },
    siteKey: (meta.site ?? '').toLowerCase(),
    equipmentKey: (meta.equipment ?? '').toLowerCase(),
    history: [],
  };
  await (await connect()).put('sessions', record);

  let pendingFrames: TrackFrame[] = [];
  // Raw audio goes to its own writer (a worker in the app): the page only hands the blocks over.
  const audioSink: AudioSink | null = meta.keepAudio ? createAudioSink(id, meta.sampleRateHz, connect) : null;
  let hasPendingAudio = false;
  let pendingMarkers: Marker[] = [];
  let pendingGaps: { timeS: number; missingS: number }[] = [];
  let isKeepingAudio = meta.keepAudio;
  let isFinished = false;
  let lastTrackProblemMs = -Infinity;
  const problemListeners: ((message: string) => void)[] = [];
  let chain: Promise<void> = Promise.resolve();

  const problem = (message: string): void => {
    for (const fn of problemListeners) {
      try {
        fn(message);
      } catch {
        /* a listener's error is not the recorder's */
      }
    }
  };

  /** Stops keeping audio after a failed write: what is pending is let go, the user told once. */
  const dropAudio = (err: unknown): void => {
    hasPendingAudio = false;
    void audioSink?.drop();
    if (!isKeepingAudio) return;
    isKeepingAudio = false;
    record = { ...record, audio: { ...record.audio, isKept: false, stoppedReason: 'storage full or failing' } };
    problem(msgAudioDropped(err));
  };

  /**
   * Writes the pending track, markers and gaps with the session record (and `final`, the last
   * fields of a finished session) in one transaction. On failure everything taken is put back.
   */
  const writeTrack = async (db: SessionDb, final?: Partial<SessionRecord>): Promise<void> => {
    // Take what is pending; appends made while the write runs go to fresh arrays.
    const frames = pendingFrames;
    const markers = pendingMarkers;
    const gaps = pendingGaps;
    pendingFrames = [];
    pendingMarkers = [];
    pendingGaps = [];
    const t = now();
    let next: SessionRecord = {
      ...record,
      heartbeatAtMs: t,
      updatedAtMs: t,
      markers: markers.length ? [...record.markers, ...markers] : record.markers,
      gaps: gaps.length ? [...record.gaps, ...gaps] : record.gaps,
      frameCount: record.frameCount + frames.length,
      frameChunkCount: record.frameChunkCount + (frames.length ? 1 : 0),
      durationS: Math.max(record.durationS, frames.length ? frames[frames.length - 1].timeS : 0),
      ...final,
    };
    const writes: Promise<unknown>[] = [];
    let tx: ReturnType<SessionDb['transaction']> | null = null;
    try {
      const trackTx = db.transaction(['sessions', 'frames'], 'readwrite');
      tx = trackTx;
      // The audio writer keeps the sample and chunk counts of the stored record: take them as stored.
      const stored = await trackTx.objectStore('sessions').get(id);
      if (stored) next = { ...next, audio: { ...next.audio, sampleCount: stored.audio.sampleCount, chunkCount: stored.audio.chunkCount }, durationS: Math.max(next.durationS, stored.durationS) };
      if (frames.length) writes.push(trackTx.objectStore('frames').put(packFrames(id, record.frameChunkCount, frames)));
      writes.push(trackTx.objectStore('sessions').put(next));
      await Promise.all([...writes, trackTx.done]);
    } catch (err) {
      if (tx) abandon(tx, writes);
      pendingFrames = frames.concat(pendingFrames);
      pendingMarkers = markers.concat(pendingMarkers);
      pendingGaps = gaps.concat(pendingGaps);
      throw err;
    }
    record = next;
  };

  /** Track first, audio second; any failure gives up the audio and keeps the track pending. */
  const flushNow = async (final?: Partial<SessionRecord>): Promise<unknown> => {
    let db: SessionDb;
    try {
      db = await connect();
      await writeTrack(db, final);
    } catch (err) {
      dropAudio(err);
      if (now() - lastTrackProblemMs > TRACK_PROBLEM_REPEAT_MS) problem(msgTrackFailed(err));
      lastTrackProblemMs = now();
      if (pendingFrames.length > MAX_PENDING_FRAMES) pendingFrames = pendingFrames.slice(pendingFrames.length - MAX_PENDING_FRAMES);
      return err;
    }
    if (isKeepingAudio && audioSink && hasPendingAudio) {
      hasPendingAudio = false;
      try {
        await audioSink.flush();
      } catch (err) {
        dropAudio(err);
        // Record at once that the audio stops here; if even this fails, the next write says it.
        await writeTrack(db).catch(() => undefined);
      }
    }
    return null;
  };

  const flush = (): Promise<void> => {
    const run = chain.then(() => flushNow());
    chain = run.then(() => undefined);
    return chain;
  };

  const useTimer = opts.useTimer ?? true;
  const timer = useTimer ? setInterval(() => void flush(), opts.flushIntervalMs ?? FLUSH_INTERVAL_MS) : null;
  // Hidden or closing tabs may not get another timer tick: write at once.
  const onHide = (): void => {
    if (typeof document !== 'undefined' && document.visibilityState === 'hidden') void flush();
  };
  if (useTimer && typeof document !== 'undefined') document.addEventListener('visibilitychange', onHide);

  /**
   * The last write: the report and status complete, with whatever track is still pending. When
   * storage refuses it, the session's stored audio is removed to make room and it is tried again;
   * if it still fails the session stays 'recording' and is completed from its stored track at the
   * next start.
   */
  const writeDone = async (report: Report): Promise<void> => {
    const done = (): Partial<SessionRecord> => ({ status: 'complete', report, durationS: Math.max(record.durationS, report.durationS) });
    let failure = await flushNow(done());
    if (failure === null) return;
    try {
      const db = await connect();
      await removeStoredAudio(db);
      problem(MSG_AUDIO_REMOVED);
      failure = await flushNow(done());
    } catch (err) {
      failure = err;
    }
    if (failure === null) return;
    const message = `The report of this session could not be saved (${describeFailure(failure)}); it will be completed from the stored track when the app next starts.`;
    problem(message);
    throw new Error(message);
  };

  /** Deletes the session's stored audio and records that it did, in one transaction. */
  const removeStoredAudio = async (db: SessionDb): Promise<void> => {
    // The writer stops first, so no chunk lands after the delete.
    await audioSink?.drop();
    const next: SessionRecord = { ...record, audio: { isKept: false, sampleCount: 0, chunkCount: 0, stoppedReason: 'removed to make room for the report (storage full)' } };
    const tx = db.transaction(['sessions', 'audio'], 'readwrite');
    const writes = [tx.objectStore('audio').delete(IDBKeyRange.bound([id, -Infinity], [id, Infinity])), tx.objectStore('sessions').put(next)];
    try {
      await Promise.all([...writes, tx.done]);
    } catch (err) {
      abandon(tx, writes);
      throw err;
    }
    isKeepingAudio = false;
    record = next;
  };

  const recorder: StoredSessionRecorder = {
    id,
    get isKeepingAudio() {
      return isKeepingAudio;
    },
    appendAudio(block, isHandedOver = false) {
      if (!isKeepingAudio || !audioSink || isFinished || block.length === 0) return;
      audioSink.append(isHandedOver ? block : block.slice());
      hasPendingAudio = true;
    },
    appendFrames(frames) {
      if (isFinished) return;
      // A caller may write to its row objects again after handing them over: keep copies.
      for (const f of frames) pendingFrames.push({ ...f });
    },
    addMarker(marker) {
      if (isFinished) return;
      pendingMarkers.push({ ...marker });
    },
    addGap(timeS, missingS) {
      if (isFinished) return;
      pendingGaps.push({ timeS, missingS });
    },
    onProblem(fn) {
      problemListeners.push(fn);
    },
    flush,
    async finish(report: Report) {
      if (isFinished) return chain;
      isFinished = true;
      if (timer !== null) clearInterval(timer);
      if (useTimer && typeof document !== 'undefined') document.removeEventListener('visibilitychange', onHide);
      const run = chain.then(() => writeDone(report));
      chain = run.catch(() => undefined);
      try {
        await run;
      } finally {
        audioSink?.close();
        releaseLock();
      }
    },
  };
  return recorder;
}

let hasAskedPersistence = false;

/**
 * Starts recording a session into the app's database. The first recording also asks the browser
 * to keep the app's storage (navigator.storage.persist).
 */
export async function startSessionRecording(meta: NewSessionMeta): Promise<SessionRecorder> {
  if (!hasAskedPersistence) {
    hasAskedPersistence = true;
    void requestPersistentStorage();
  }
  return createSessionRecorder(meta);
}
