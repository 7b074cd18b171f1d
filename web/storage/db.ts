/**
 * The on-device session store (IndexedDB through idb). This is the only module that imports idb.
 *
 * Schema history (upgrades are keyed on oldVersion, so a store of any earlier version is carried
 * forward step by step):
 * - v1: one store `sessions`; each record held its whole track as an array of TrackFrame objects
 *   and its metadata as flat fields (site, equipment, notes); `isComplete` flagged a finished
 *   recording. No raw audio.
 * - v2: metadata nested under `meta`; a `status` (recording / complete / interrupted / recovered);
 *   the track moved to a `frames` store in column chunks (one chunk per flush, about a second),
 *   raw audio in an `audio` store in chunks; indexes for the list (by creation time, site,
 *   equipment) and a heartbeat so an abandoned recording can be told from a live one.
 */
import { openDB, type DBSchema, type IDBPDatabase, type IDBPTransaction, type StoreNames } from 'idb';
import type { DuctGeometry, Marker, RegimeKind, Report, TrackFrame } from '../../dsp/types';

/** Current schema version of the database and of exported bundles. */
export const DB_VERSION = 2;
export const DEFAULT_DB_NAME = 'humgauge';

export type SessionStatus = 'recording' | 'complete' | 'interrupted' | 'recovered';

/** Everything the user or the capture knows about a session besides the measurement. */
export interface SessionMeta {
  source: 'microphone' | 'file' | 'import';
  fileName?: string;
  sampleRateHz: number;
  site: string;
  equipment: string;
  notes: string;
  geometry?: DuctGeometry;
  /** Offset added to dBFS to give dB SPL, dB, and where it came from. */
  calibrationOffsetDb?: number;
  calibrationSource?: string;
  captureSettings?: Record<string, string | number | boolean>;
}

/** A gap in the input (suspended capture) at timeS lasting missingS, both s. */
export interface Gap {
  timeS: number;
  missingS: number;
}

/** What is known about the stored raw audio of a session. */
export interface AudioInfo {
  /** True while audio is being (or was) kept for the whole session. */
  isKept: boolean;
  sampleCount: number;
  chunkCount: number;
  /** Why audio stopped being kept (storage full, user choice), if it did. */
  stoppedReason?: string;
}

/** The session record (v2). The track and the audio live in their own stores. */
export interface SessionRecord {
  id: string;
  /** Milliseconds since 1970 (UTC). */
  createdAtMs: number;
  updatedAtMs: number;
  /** Last time a live recorder wrote, ms since 1970; used to tell abandoned recordings. */
  heartbeatAtMs: number;
  status: SessionStatus;
  /**
   * Set on a session this device recorded (at its creation by the recorder, or carried over from
   * v1); imported sessions never carry it. Only such sessions are ever recovered after a crash.
   */
  isLocalRecording?: boolean;
  meta: SessionMeta;
  markers: Marker[];
  gaps: Gap[];
  report: Report | null;
  durationS: number;
  frameCount: number;
  frameChunkCount: number;
  audio: AudioInfo;
  /** Lower-cased copies of site and equipment for the search indexes. */
  siteKey: string;
  equipmentKey: string;
  /** Notes on how the record came to be (recovered after interruption, imported from ...). */
  history: string[];
}

/** One flush worth of track frames, stored column-wise (exact doubles, 34 bytes a frame). */
export interface FrameChunk {
  sessionId: string;
  seq: number;
  timeS: Float64Array;
  frequencyHz: Float64Array;
  amplitudeDbfs: Float64Array;
  levelDbfs: Float64Array;
  /** Index into REGIME_KINDS. */
  state: Uint8Array;
  /** Bit 0: isClipped, bit 1: isAfterGap. */
  flags: Uint8Array;
}

/** One flush worth of raw audio, full scale ±1. */
export interface AudioChunk {
  sessionId: string;
  seq: number;
  startSample: number;
  samples: Float32Array;
}

export const REGIME_KINDS: readonly RegimeKind[] = ['quiet', 'growth', 'steady', 'decay'];

/** Bytes a stored frame costs in the column layout (four float64 columns and two byte columns). */
export const BYTES_PER_FRAME = 4 * 8 + 2;
/** Bytes a stored audio sample costs (float32). */
export const BYTES_PER_AUDIO_SAMPLE = 4;

/** v1 record layout, kept for the migration and its tests. */
export interface SessionRecordV1 {
  id: string;
  createdAtMs: number;
  site: string;
  equipment: string;
  notes: string;
  sampleRateHz: number;
  geometry?: DuctGeometry;
  markers: Marker[];
  track: TrackFrame[];
  report: Report | null;
  isComplete: boolean;
}

export interface HumgaugeDB extends DBSchema {
  sessions: {
    key: string;
    value: SessionRecord;
    indexes: { 'by-created': number; 'by-site': string; 'by-equipment': string; 'by-status': string };
  };
  frames: { key: [string, number]; value: FrameChunk; indexes: { 'by-session': string } };
  audio: { key: [string, number]; value: AudioChunk; indexes: { 'by-session': string } };
}

export type SessionDb = IDBPDatabase<HumgaugeDB>;
type UpgradeTx = IDBPTransaction<HumgaugeDB, ArrayLike<StoreNames<HumgaugeDB>>, 'versionchange'>;

/** Packs track frames into one column chunk. */
export function packFrames(sessionId: string, seq: number, frames: readonly TrackFrame[]): FrameChunk {
  const n = frames.length;
  const chunk: FrameChunk = {
    sessionId,
    seq,
    timeS: new Float64Array(n),
    frequencyHz: new Float64Array(n),
    amplitudeDbfs: new Float64Array(n),
    levelDbfs: new Float64Array(n),
    state: new Uint8Array(n),
    flags: new Uint8Array(n),
  };
  for (let i = 0; i < n; i++) {
    const f = frames[i];
    chunk.timeS[i] = f.timeS;
    chunk.frequencyHz[i] = f.frequencyHz;
    chunk.amplitudeDbfs[i] = f.amplitudeDbfs;
    chunk.levelDbfs[i] = f.levelDbfs;
    const k = REGIME_KINDS.indexOf(f.state);
    chunk.state[i] = k < 0 ? 0 : k;
    chunk.flags[i] = (f.isClipped ? 1 : 0) | (f.isAfterGap ? 2 : 0);
  }
  return chunk;
}

/** Unpacks column chunks (in seq order) into track frames. */
export function unpackFrames(chunks: readonly FrameChunk[]): TrackFrame[] {
  const out: TrackFrame[] = [];
  for (const c of chunks) {
    for (let i = 0; i < c.timeS.length; i++) {
      out.push({
        timeS: c.timeS[i],
        frequencyHz: c.frequencyHz[i],
        amplitudeDbfs: c.amplitudeDbfs[i],
        levelDbfs: c.levelDbfs[i],
        state: REGIME_KINDS[c.state[i]] ?? 'quiet',
        isClipped: (c.flags[i] & 1) !== 0,
        isAfterGap: (c.flags[i] & 2) !== 0,
      });
    }
  }
  return out;
}

/** Frames are flushed about once a second; a migrated v1 track is cut into chunks of this many. */
const MIGRATION_CHUNK_FRAMES = 100;

function upgradeToV1(db: IDBPDatabase<HumgaugeDB>): void {
  // The v1 store held SessionRecordV1 values; the typed schema describes v2, hence the cast.
  (db as unknown as IDBPDatabase).createObjectStore('sessions', { keyPath: 'id' });
}

async function upgradeV1ToV2(db: IDBPDatabase<HumgaugeDB>, tx: UpgradeTx): Promise<void> {
  const frames = db.createObjectStore('frames', { keyPath: ['sessionId', 'seq'] });
  frames.createIndex('by-session', 'sessionId');
  const audio = db.createObjectStore('audio', { keyPath: ['sessionId', 'seq'] });
  audio.createIndex('by-session', 'sessionId');
  const sessions = tx.objectStore('sessions');
  sessions.createIndex('by-created', 'createdAtMs');
  sessions.createIndex('by-site', 'siteKey');
  sessions.createIndex('by-equipment', 'equipmentKey');
  sessions.createIndex('by-status', 'status');
  let cursor = await sessions.openCursor();
  while (cursor) {
    const old = cursor.value as unknown as SessionRecordV1;
    const track = Array.isArray(old.track) ? old.track : [];
    let seq = 0;
    for (let i = 0; i < track.length; i += MIGRATION_CHUNK_FRAMES) {
      await tx.objectStore('frames').put(packFrames(old.id, seq++, track.slice(i, i + MIGRATION_CHUNK_FRAMES)));
    }
    const last = track.length ? track[track.length - 1].timeS : 0;
    const rec: SessionRecord = {
      id: old.id,
      createdAtMs: old.createdAtMs,
      updatedAtMs: old.createdAtMs,
      heartbeatAtMs: old.createdAtMs,
      // A v1 record that never completed was abandoned long ago: mark it for recovery.
      status: old.isComplete ? 'complete' : 'interrupted',
      // v1 had no import: every record was recorded here.
      isLocalRecording: true,
      meta: {
        source: 'microphone',
        sampleRateHz: old.sampleRateHz,
        site: old.site ?? '',
        equipment: old.equipment ?? '',
        notes: old.notes ?? '',
        ...(old.geometry ? { geometry: old.geometry } : {}),
      },
      markers: old.markers ?? [],
      gaps: [],
      report: old.report ?? null,
      durationS: old.report?.durationS ?? last,
      frameCount: track.length,
      frameChunkCount: seq,
      audio: { isKept: false, sampleCount: 0, chunkCount: 0 },
      siteKey: (old.site ?? '').toLowerCase(),
      equipmentKey: (old.equipment ?? '').toLowerCase(),
      history: ['Carried over from storage layout v1.'],
    };
    await cursor.update(rec);
    cursor = await cursor.continue();
  }
}

export interface OpenOptions {
  /** Database name (tests use unique names). */
  name?: string;
  /** Open at an earlier version (migration tests only). */
  version?: number;
  /** Another tab holds an older version open and did not close it. */
  onBlocked?: () => void;
  /** A newer version of the app wants the database: this connection has been closed. */
  onVersionChange?: () => void;
  /** The browser closed the connection abnormally (e.g. after an I/O error on a full disk). */
  onTerminated?: () => void;
}

/**
 * Opens (creating or migrating) the session database. On a version change requested by another
 * tab this connection closes itself at once, so the other tab never deadlocks; `onVersionChange`
 * lets the app tell the user to reload.
 */
export async function openSessionDb(opts: OpenOptions = {}): Promise<SessionDb> {
  const version = opts.version ?? DB_VERSION;
  if (!Number.isInteger(version) || version < 1 || version > DB_VERSION) throw new RangeError(`openSessionDb: version must be 1..${DB_VERSION}`);
  const db: SessionDb = await openDB<HumgaugeDB>(opts.name ?? DEFAULT_DB_NAME, version, {
    async upgrade(udb, oldVersion, newVersion, tx) {
      const target = newVersion ?? version;
      if (oldVersion < 1) upgradeToV1(udb);
      if (oldVersion < 2 && target >= 2) await upgradeV1ToV2(udb, tx);
    },
    blocked() {
      opts.onBlocked?.();
    },
    blocking() {
      db.close();
      opts.onVersionChange?.();
    },
    terminated() {
      opts.onTerminated?.();
    },
  });
  return db;
}
