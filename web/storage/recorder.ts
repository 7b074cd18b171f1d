/**
 * Crash-safe recording of a session: the track, markers, gaps and (optionally) raw audio are kept
 * in memory for about a second and then written to IndexedDB in one transaction, so a closed tab,
 * a crash or a flat battery loses at most a couple of seconds. When storage is full the audio is
 * dropped first; the track and the report keep being saved, and the user is told.
 */
import type { Marker, Report, TrackFrame } from '../../dsp/types';
import { isQuotaError, packFrames, type SessionDb, type SessionRecord } from './db';
import type { NewSessionMeta, SessionRecorder } from './recording-api';
import { getSessionDb, newSessionId, recordingLockName, requestPersistentStorage } from './sessions';

/** Interval between writes, ms ("about once a second"). */
export const FLUSH_INTERVAL_MS = 1000;
/** Track frames held in memory while storage refuses them (about 10 minutes at 100 frames/s). */
const MAX_PENDING_FRAMES = 60_000;

export interface RecorderOptions {
  db?: SessionDb;
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

const MSG_AUDIO_DROPPED = 'Storage is full: the raw audio is no longer kept for this session. The track, the markers and the report are still being saved.';
const MSG_TRACK_FAILED = 'Storage is full: the track could not be saved just now; it is held in memory and saving will be tried again. Free some space (delete or export old sessions).';

function cleanSettings(settings: Record<string, unknown> | undefined): Record<string, string | number | boolean> | undefined {
  if (!settings) return undefined;
  const out: Record<string, string | number | boolean> = {};
  for (const [k, v] of Object.entries(settings)) {
    if (typeof v === 'string' || typeof v === 'boolean' || (typeof v === 'number' && Number.isFinite(v))) out[k] = v;
  }
  return out;
}

/** Creates the session record and returns its recorder (the app uses startSessionRecording). */
export async function createSessionRecorder(meta: NewSessionMeta, opts: RecorderOptions = {}): Promise<StoredSessionRecorder> {
  const db = opts.db ?? (await getSessionDb());
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
  await db.put('sessions', record);

  let pendingFrames: TrackFrame[] = [];
  let pendingAudio: Float32Array[] = [];
  let pendingAudioSamples = 0;
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

  /** One write of everything pending; returns false on a quota error. */
  const writeOnce = async (withAudio: boolean): Promise<'ok' | 'quota'> => {
    // Take what is pending; appends made while the write runs go to fresh arrays.
    const frames = pendingFrames;
    const audio = withAudio ? pendingAudio : [];
    const audioSamples = withAudio ? pendingAudioSamples : 0;
    const markers = pendingMarkers;
    const gaps = pendingGaps;
    pendingFrames = [];
    pendingMarkers = [];
    pendingGaps = [];
    if (withAudio) {
      pendingAudio = [];
      pendingAudioSamples = 0;
    }
    const putBack = (): void => {
      pendingFrames = frames.concat(pendingFrames);
      pendingMarkers = markers.concat(pendingMarkers);
      pendingGaps = gaps.concat(pendingGaps);
      if (withAudio) {
        pendingAudio = audio.concat(pendingAudio);
        pendingAudioSamples += audioSamples;
      }
    };
    const stores: ('sessions' | 'frames' | 'audio')[] = ['sessions', 'frames'];
    if (audio.length) stores.push('audio');
    const tx = db.transaction(stores, 'readwrite');
    const t = now();
    const next: SessionRecord = {
      ...record,
      heartbeatAtMs: t,
      updatedAtMs: t,
      markers: markers.length ? [...record.markers, ...markers] : record.markers,
      gaps: gaps.length ? [...record.gaps, ...gaps] : record.gaps,
      frameCount: record.frameCount + frames.length,
      frameChunkCount: record.frameChunkCount + (frames.length ? 1 : 0),
      audio: { ...record.audio, isKept: isKeepingAudio, sampleCount: record.audio.sampleCount + audioSamples, chunkCount: record.audio.chunkCount + (audio.length ? 1 : 0) },
    };
    next.durationS = Math.max(record.durationS, frames.length ? frames[frames.length - 1].timeS : 0, next.audio.sampleCount / record.meta.sampleRateHz);
    const writes: Promise<unknown>[] = [];
    try {
      if (frames.length) writes.push(tx.objectStore('frames').put(packFrames(id, record.frameChunkCount, frames)));
      if (audio.length) {
        const joined = new Float32Array(audioSamples);
        let off = 0;
        for (const b of audio) {
          joined.set(b, off);
          off += b.length;
        }
        writes.push(tx.objectStore('audio').put({ sessionId: id, seq: record.audio.chunkCount, startSample: record.audio.sampleCount, samples: joined }));
      }
      writes.push(tx.objectStore('sessions').put(next));
      await Promise.all([...writes, tx.done]);
    } catch (err) {
      // Nothing of a failed write may stay: abort what the transaction holds.
      try {
        tx.abort();
      } catch {
        /* already aborted by the browser */
      }
      tx.done.catch(() => undefined);
      for (const w of writes) w.catch(() => undefined);
      putBack();
      if (isQuotaError(err)) return 'quota';
      throw err;
    }
    record = next;
    return 'ok';
  };

  const flushNow = async (): Promise<void> => {
    try {
      let result = await writeOnce(isKeepingAudio);
      if (result === 'quota' && isKeepingAudio) {
        isKeepingAudio = false;
        pendingAudio = [];
        pendingAudioSamples = 0;
        record = { ...record, audio: { ...record.audio, isKept: false, stoppedReason: 'storage full' } };
        problem(MSG_AUDIO_DROPPED);
        result = await writeOnce(false);
      }
      if (result === 'quota') {
        if (now() - lastTrackProblemMs > 30_000) problem(MSG_TRACK_FAILED);
        lastTrackProblemMs = now();
        if (pendingFrames.length > MAX_PENDING_FRAMES) pendingFrames = pendingFrames.slice(pendingFrames.length - MAX_PENDING_FRAMES);
      }
    } catch (err) {
      problem(`Saving the session failed: ${err instanceof Error ? err.message : String(err)}`);
    }
  };

  const flush = (): Promise<void> => {
    chain = chain.then(flushNow);
    return chain;
  };

  const useTimer = opts.useTimer ?? true;
  const timer = useTimer ? setInterval(() => void flush(), opts.flushIntervalMs ?? FLUSH_INTERVAL_MS) : null;
  // Hidden or closing tabs may not get another timer tick: write at once.
  const onHide = (): void => {
    if (typeof document !== 'undefined' && document.visibilityState === 'hidden') void flush();
  };
  if (useTimer && typeof document !== 'undefined') document.addEventListener('visibilitychange', onHide);

  const recorder: StoredSessionRecorder = {
    id,
    get isKeepingAudio() {
      return isKeepingAudio;
    },
    appendAudio(block) {
      if (!isKeepingAudio || isFinished || block.length === 0) return;
      pendingAudio.push(block.slice());
      pendingAudioSamples += block.length;
    },
    appendFrames(frames) {
      if (isFinished) return;
      // The analysis reuses its frame objects after the next push: keep copies.
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
      try {
        await flush();
        if (pendingFrames.length) await flush();
        await writeDone(report);
      } finally {
        releaseLock();
      }
    },
  };
  /** The last write: status complete with the report. */
  const writeDone = async (report: Report): Promise<void> => {
    const t = now();
    const done: SessionRecord = { ...record, status: 'complete', report, updatedAtMs: t, heartbeatAtMs: t, durationS: Math.max(record.durationS, report.durationS) };
    if (pendingFrames.length) done.history = [...done.history, `${pendingFrames.length} track frames could not be saved (storage full).`];
    try {
      await db.put('sessions', done);
      record = done;
    } catch (err) {
      const message = isQuotaError(err) ? 'Storage is full: the report of this session could not be saved.' : `Saving the report failed: ${err instanceof Error ? err.message : String(err)}`;
      problem(message);
      throw new Error(message);
    }
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
