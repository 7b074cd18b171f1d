/** The table of store calls the storage worker answers (off-thread.ts callStore; store.worker.ts). */
import type { SessionDb } from './db';
import { bundleStoredSessions } from './export';
import { deleteSession, listSessions, loadFullSession, replaceSessionReport, restoreSession, updateSessionMarkers, updateSessionMeta } from './sessions';

/**
 * The reads and edits of stored sessions the Sessions screen makes, each run by sessions.ts with
 * the worker's own connection: the page never reads the database itself (a stored session of
 * ten minutes is a hundred megabytes of audio and sixty thousand frames to read and unpack), and
 * the export bundles are zipped there too.
 */
export const STORE_METHODS = {
  list: listSessions,
  load: loadFullSession,
  updateMeta: updateSessionMeta,
  updateMarkers: updateSessionMarkers,
  replaceReport: replaceSessionReport,
  delete: deleteSession,
  restore: restoreSession,
  bundle: bundleStoredSessions,
} as const;
export type StoreMethod = keyof typeof STORE_METHODS;
export type Tail<F> = F extends (db: SessionDb, ...rest: infer R) => unknown ? R : never;
export type Result<F> = F extends (...a: never[]) => Promise<infer T> ? T : never;

/** Large arrays in a reply, handed over rather than copied. */
export function transferablesOfValue(value: unknown): Transferable[] {
  const out: Transferable[] = [];
  const full = value as { audio?: unknown; bytes?: unknown } | null;
  if (full && full.audio instanceof Float32Array && full.audio.buffer instanceof ArrayBuffer) out.push(full.audio.buffer);
  if (full && full.bytes instanceof Uint8Array && full.bytes.buffer instanceof ArrayBuffer) out.push(full.bytes.buffer);
  return out;
}

