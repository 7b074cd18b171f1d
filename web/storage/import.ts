/**
 * Import of session bundles. Everything is read and validated before anything is written; then
 * all new sessions are written in one transaction (all or nothing). A session already stored
 * (same id) is recognised and left as it is.
 */
import * as v from 'valibot';
import type { TrackFrame } from '../../dsp/types';
import { ManifestSchema, SESSION_JSON_MAX_BYTES, SessionFileSchema, type SessionFile } from './bundle-schema';
import type { SessionDb } from './db';
import { putFullSessions, type FullSession } from './sessions';
import { blobSource, bytesSource, DEFAULT_ZIP_LIMITS, listZip, readZipEntry, ZipError, type ByteSource, type ZipEntry, type ZipLimits } from './zip-read';

/** A bundle was refused; the message says why, for the user. Nothing was written. */
export class ImportError extends Error {
  constructor(message: string) {
    super(message);
    this.name = 'ImportError';
  }
}

const FORBIDDEN_KEYS = new Set(['__proto__', 'constructor', 'prototype']);

/**
 * JSON.parse, then a walk that refuses keys able to reach object prototypes (__proto__,
 * constructor, prototype). A walk after parsing is much faster than a reviver on long tracks.
 */
export function parseJsonSafely(text: string, where: string): unknown {
  let value: unknown;
  try {
    value = JSON.parse(text);
  } catch (err) {
    throw new ImportError(`${where} is not valid JSON (${err instanceof Error ? err.message : String(err)}).`);
  }
  const stack: unknown[] = [value];
  while (stack.length) {
    const x = stack.pop();
    if (typeof x !== 'object' || x === null) continue;
    if (Array.isArray(x)) {
      for (let i = 0; i < x.length; i++) if (typeof x[i] === 'object' && x[i] !== null) stack.push(x[i]);
      continue;
    }
    for (const key of Object.keys(x)) {
      if (FORBIDDEN_KEYS.has(key)) throw new ImportError(`${where}: the key "${key}" is not allowed.`);
      stack.push((x as Record<string, unknown>)[key]);
    }
  }
  return value;
}

function firstIssue(issues: readonly v.BaseIssue<unknown>[], where: string): ImportError {
  const issue = issues[0];
  const path = v.getDotPath(issue);
  const more = issues.length > 1 ? ` (and ${issues.length - 1} more problem${issues.length > 2 ? 's' : ''})` : '';
  const message = issue.message.startsWith('Invalid key') || issue.type === 'strict_object' ? `unexpected field${path ? ` at ${path}` : ''}` : issue.message;
  return new ImportError(`${where}${path ? `, ${path}` : ''}: ${message}${more}.`);
}

/** Reads a mono WAV (16-bit PCM or 32-bit float) into samples, full scale ±1. */
export function parseWav(bytes: Uint8Array, where: string): { sampleRateHz: number; samples: Float32Array } {
  const dv = new DataView(bytes.buffer, bytes.byteOffset, bytes.byteLength);
  const tag = (at: number): string => String.fromCharCode(bytes[at], bytes[at + 1], bytes[at + 2], bytes[at + 3]);
  if (bytes.length < 12 || tag(0) !== 'RIFF' || tag(8) !== 'WAVE') throw new ImportError(`${where} is not a WAV file.`);
  let p = 12;
  let fmt: { format: number; channels: number; rate: number; bits: number } | null = null;
  while (p + 8 <= bytes.length) {
    const id = tag(p);
    const size = dv.getUint32(p + 4, true);
    const body = p + 8;
    if (body + size > bytes.length) throw new ImportError(`${where} is cut short.`);
    if (id === 'fmt ') {
      if (size < 16) throw new ImportError(`${where} has a damaged format block.`);
      fmt = { format: dv.getUint16(body, true), channels: dv.getUint16(body + 2, true), rate: dv.getUint32(body + 4, true), bits: dv.getUint16(body + 14, true) };
    } else if (id === 'data') {
      if (!fmt) throw new ImportError(`${where} has its data before its format block.`);
      if (fmt.channels !== 1) throw new ImportError(`${where} has ${fmt.channels} channels; session audio is mono.`);
      const isFloat = fmt.format === 3 && fmt.bits === 32;
      const isPcm16 = fmt.format === 1 && fmt.bits === 16;
      if (!isFloat && !isPcm16) throw new ImportError(`${where} is neither 16-bit PCM nor 32-bit float.`);
      const n = Math.floor(size / (isFloat ? 4 : 2));
      const out = new Float32Array(n);
      if (isFloat) {
        // Copy the bytes into a float array (WAV is little-endian, as are the platforms we run on; checked below).
        new Uint8Array(out.buffer).set(bytes.subarray(body, body + 4 * n));
        if (n > 0 && out[0] !== dv.getFloat32(body, true)) {
          for (let i = 0; i < n; i++) out[i] = dv.getFloat32(body + 4 * i, true);
        }
      } else {
        for (let i = 0; i < n; i++) out[i] = dv.getInt16(body + 2 * i, true) / 32768;
      }
      for (let i = 0; i < n; i++) {
        const x = out[i];
        // Any finite sample is audio the app may hold (a float WAV may exceed full scale); only NaN and ±∞ are refused.
        if (!Number.isFinite(x)) throw new ImportError(`${where} holds a non-finite sample at ${i}.`);
      }
      return { sampleRateHz: fmt.rate, samples: out };
    }
    p = body + size + (size & 1);
  }
  throw new ImportError(`${where} has no audio data.`);
}

function toFullSession(file: SessionFile, audio: Float32Array | null): FullSession {
  const s = file.session;
  const t = file.track;
  const track: TrackFrame[] = new Array(t.timeS.length);
  for (let i = 0; i < t.timeS.length; i++) {
    track[i] = { timeS: t.timeS[i], frequencyHz: t.frequencyHz[i], amplitudeDbfs: t.amplitudeDbfs[i], levelDbfs: t.levelDbfs[i], state: t.state[i], isClipped: t.isClipped[i], isAfterGap: t.isAfterGap[i] };
  }
  return {
    record: {
      ...s,
      heartbeatAtMs: s.updatedAtMs,
      frameCount: track.length,
      frameChunkCount: 0,
      audio: { ...s.audio, chunkCount: 0 },
      siteKey: s.meta.site.toLowerCase(),
      equipmentKey: s.meta.equipment.toLowerCase(),
    },
    track,
    audio,
  };
}

/** Largest manifest.json, bytes: a bundle lists at most 1000 sessions in about 120 bytes each. */
const MANIFEST_MAX_BYTES = 1024 * 1024;
/** Bytes of the canonical WAV header the app writes (RIFF, fmt of 16 bytes, data). */
const WAV_HEADER_BYTES = 44;

/** A bundle to read: a file (read piece by piece, never whole) or bytes in memory. */
export type BundleInput = Blob | Uint8Array;

/** Reads and validates every session of a bundle. Throws ImportError; writes nothing. */
export async function readBundle(input: BundleInput, limits: ZipLimits = DEFAULT_ZIP_LIMITS): Promise<FullSession[]> {
  const source: ByteSource = input instanceof Uint8Array ? bytesSource(input) : blobSource(input);
  const files = new Map<string, ZipEntry>();
  const read = async (name: string, maxBytes: number, what: string): Promise<Uint8Array> => {
    const e = files.get(name);
    if (!e) throw new ImportError(`The bundle has no ${name}.`);
    try {
      return await readZipEntry(source, e, maxBytes, what);
    } catch (err) {
      throw new ImportError(err instanceof Error ? err.message : String(err));
    }
  };
  try {
    for (const e of await listZip(source, limits)) files.set(e.name, e);
  } catch (err) {
    if (err instanceof ZipError) throw new ImportError(err.message);
    throw err;
  }
  const text = async (name: string, maxBytes: number, what: string): Promise<string> => {
    const bytes = await read(name, maxBytes, what);
    try {
      return new TextDecoder('utf-8', { fatal: true }).decode(bytes);
    } catch {
      throw new ImportError(`${name} is not valid UTF-8 text.`);
    }
  };
  const manifestResult = v.safeParse(ManifestSchema, parseJsonSafely(await text('manifest.json', MANIFEST_MAX_BYTES, 'a bundle\'s manifest'), 'manifest.json'));
  if (!manifestResult.success) throw firstIssue(manifestResult.issues, 'manifest.json');
  const manifest = manifestResult.output;
  const ids = new Set<string>();
  const out: FullSession[] = [];
  for (const item of manifest.sessions) {
    if (ids.has(item.id)) throw new ImportError(`manifest.json lists session ${item.id} twice.`);
    ids.add(item.id);
    const where = `${item.folder}/session.json`;
    const parsed = v.safeParse(SessionFileSchema, parseJsonSafely(await text(where, SESSION_JSON_MAX_BYTES, 'the JSON of a session'), where));
    if (!parsed.success) throw firstIssue(parsed.issues, where);
    const file = parsed.output;
    if (file.session.id !== item.id) throw new ImportError(`${where} holds session ${file.session.id}, but the manifest says ${item.id}.`);
    let audio: Float32Array | null = null;
    if (item.hasAudio) {
      const wavName = `${item.folder}/audio.wav`;
      const n = file.session.audio.sampleCount;
      // The app writes 16-bit or float samples after a 44-byte header: the size is known before reading.
      const entry = files.get(wavName);
      if (entry && entry.size !== WAV_HEADER_BYTES + 2 * n && entry.size !== WAV_HEADER_BYTES + 4 * n) {
        throw new ImportError(`${wavName} would expand to ${entry.size} bytes, but ${n} samples of 16-bit or float audio take ${WAV_HEADER_BYTES + 2 * n} or ${WAV_HEADER_BYTES + 4 * n}.`);
      }
      // Audio is stored uncompressed, so an audio.wav the app wrote is never larger than a bundle may be.
      const wav = parseWav(await read(wavName, limits.maxZipBytes, 'the audio of a session'), wavName);
      // A WAV header holds whole hertz; a session at a fractional rate keeps its exact rate in session.json.
      if (wav.sampleRateHz !== Math.max(1, Math.round(file.session.meta.sampleRateHz))) throw new ImportError(`${wavName} runs at ${wav.sampleRateHz} Hz, but the session says ${file.session.meta.sampleRateHz} Hz.`);
      if (wav.samples.length !== n) throw new ImportError(`${wavName} holds ${wav.samples.length} samples, but the session says ${n}.`);
      audio = wav.samples;
    } else if (file.session.audio.sampleCount !== 0) {
      throw new ImportError(`${where} says it has ${file.session.audio.sampleCount} audio samples, but the bundle holds no audio for it.`);
    }
    out.push(toFullSession(file, audio));
  }
  return out;
}

export interface ImportResult {
  /** Sessions written now. */
  imported: string[];
  /** Sessions recognised as already stored (same id); left unchanged. */
  alreadyPresent: string[];
}

/** Validates the whole bundle, then writes its new sessions in one transaction. */
export async function importBundle(db: SessionDb, input: BundleInput, limits: ZipLimits = DEFAULT_ZIP_LIMITS): Promise<ImportResult> {
  const sessions = await readBundle(input, limits);
  const fresh: FullSession[] = [];
  const alreadyPresent: string[] = [];
  for (const s of sessions) {
    if (await db.getKey('sessions', s.record.id)) alreadyPresent.push(s.record.id);
    else fresh.push(s);
  }
  if (fresh.length) await putFullSessions(db, fresh);
  return { imported: fresh.map((s) => s.record.id), alreadyPresent };
}
