/**
 * The page's side of the storage worker (store.worker.ts): a bundle import and the completion of
 * interrupted recordings run there, each in a worker of its own that ends with the job, so the
 * page never stalls and the memory they used is given back at once. Where workers are missing
 * (unit tests in Node) the same code runs on this thread.
 */
import { getSessionDb, recoverInterruptedSessions, type StoredAnalysisOptions } from './sessions';
import { STORE_METHODS, type Result, type StoreMethod, type Tail } from './store-methods';
import { ImportError, importBundle, type ImportResult } from './import';
import { analyseStoredAudio, reanalyseInThread } from './reanalyse';
import type { Report } from '../../dsp/types';
import { createAudioWriter, type AudioWriter } from './audio-writer';
import type { SessionDb } from './db';

export type StoreRequest =
  | { id: number; type: 'import'; file: Blob }
  | { id: number; type: 'recover' }
  | { id: number; type: 'reanalyse'; sessionId: string; options: StoredAnalysisOptions }
  | { id: number; type: 'call'; method: StoreMethod; args: unknown[] };
export type StoreReply =
  | { id: number; ok: true; type: 'import'; result: ImportResult }
  | { id: number; ok: true; type: 'recover'; ids: string[] }
  | { id: number; ok: true; type: 'reanalyse'; report: Report }
  | { id: number; ok: true; type: 'progress'; fraction: number }
  | { id: number; ok: true; type: 'call'; value: unknown }
  | { id: number; ok: false; message: string; isImportError: boolean };

let nextId = 1;

/** Runs one job in a fresh storage worker; rejects with ImportError for a refused bundle. Progress replies go to `onProgress`. */
function runInWorker(request: StoreRequest, onProgress?: (fraction: number) => void): Promise<StoreReply & { ok: true }> {
  return new Promise((resolve, reject) => {
    const worker = new Worker(new URL('./store.worker.ts', import.meta.url), { type: 'module', name: 'storage' });
    const done = (): void => worker.terminate();
    worker.onmessage = (event: MessageEvent<StoreReply>) => {
      const reply = event.data;
      if (reply.ok && reply.type === 'progress') {
        onProgress?.(reply.fraction);
        return;
      }
      done();
      if (reply.ok) resolve(reply);
      else reject(reply.isImportError ? new ImportError(reply.message) : new Error(reply.message));
    };
    worker.onerror = (event) => {
      done();
      reject(new Error(`The storage worker failed: ${event.message || 'it could not start'}`));
    };
    worker.postMessage(request);
  });
}

const hasWorkers = (): boolean => typeof Worker !== 'undefined';

/**
 * Imports a bundle file: its size is checked before anything is read, it is read piece by piece,
 * validated whole, then written in one transaction (nothing on refusal).
 */
export async function importBundleFile(file: Blob): Promise<ImportResult> {
  if (!hasWorkers()) return importBundle(await getSessionDb(), file);
  const reply = await runInWorker({ id: nextId++, type: 'import', file });
  if (reply.type !== 'import') throw new Error('The storage worker answered another job.');
  return reply.result;
}

/** Completes this device's interrupted recordings from what was stored; resolves with their ids. */
export async function recoverInterruptedOffThread(): Promise<string[]> {
  if (!hasWorkers()) return recoverInterruptedSessions(await getSessionDb(), analyseStoredAudio);
  const reply = await runInWorker({ id: nextId++, type: 'recover' });
  if (reply.type !== 'recover') throw new Error('The storage worker answered another job.');
  return reply.ids;
}

/**
 * Runs the analysis again over a stored session's audio (reanalyse.ts, the routine recovery uses
 * too) in the storage worker, which reads the audio itself: the page neither holds nor copies it.
 * Rejects with a message for the user when the session has no audio kept or the rate is not one
 * the analysis takes.
 */
export async function reanalyseStoredSession(sessionId: string, options: StoredAnalysisOptions, onProgress: (fraction: number) => void): Promise<Report> {
  if (!hasWorkers()) return reanalyseInThread(await getSessionDb(), sessionId, options, onProgress);
  const reply = await runInWorker({ id: nextId++, type: 'reanalyse', sessionId, options }, onProgress);
  if (reply.type !== 'reanalyse') throw new Error('The storage worker answered another job.');
  return reply.report;
}

/** The long-lived worker that answers store calls (started on first use, ended when idle). */
let callWorker: Worker | null = null;
let idleTimer: ReturnType<typeof setTimeout> | null = null;
const pendingCalls = new Map<number, { resolve: (v: unknown) => void; reject: (e: Error) => void }>();
/** A call worker idle this long ends (its memory is given back), ms. */
const CALL_WORKER_IDLE_MS = 30_000;

function callWorkerNow(): Worker {
  if (idleTimer !== null) clearTimeout(idleTimer);
  idleTimer = null;
  if (callWorker) return callWorker;
  const w = new Worker(new URL('./store.worker.ts', import.meta.url), { type: 'module', name: 'sessions' });
  w.onmessage = (event: MessageEvent<StoreReply>) => {
    const r = event.data;
    const p = pendingCalls.get(r.id);
    if (!p) return;
    pendingCalls.delete(r.id);
    if (r.ok && r.type === 'call') p.resolve(r.value);
    else if (!r.ok) p.reject(new Error(r.message));
    if (pendingCalls.size === 0) {
      idleTimer = setTimeout(() => {
        if (pendingCalls.size === 0 && callWorker === w) {
          w.terminate();
          callWorker = null;
        }
      }, CALL_WORKER_IDLE_MS);
    }
  };
  w.onerror = (event) => {
    const err = new Error(`The storage worker failed: ${event.message || 'it could not start'}`);
    for (const p of pendingCalls.values()) p.reject(err);
    pendingCalls.clear();
    w.terminate();
    if (callWorker === w) callWorker = null;
  };
  callWorker = w;
  return w;
}

/** Runs a sessions.ts function on the stored sessions, in the storage worker where workers exist. */
export async function callStore<M extends StoreMethod>(method: M, ...args: Tail<(typeof STORE_METHODS)[M]>): Promise<Result<(typeof STORE_METHODS)[M]>> {
  type R = Result<(typeof STORE_METHODS)[M]>;
  if (!hasWorkers()) return (STORE_METHODS[method] as (db: SessionDb, ...a: unknown[]) => Promise<R>)(await getSessionDb(), ...args);
  const id = nextId++;
  return new Promise<R>((resolve, reject) => {
    pendingCalls.set(id, { resolve: resolve as (v: unknown) => void, reject });
    callWorkerNow().postMessage({ id, type: 'call', method, args } satisfies StoreRequest);
  });
}

/** Messages of the audio worker (audio.worker.ts). */
export type AudioRequest =
  | { type: 'open'; sessionId: string; sampleRateHz: number }
  | { type: 'append'; samples: Float32Array }
  | { type: 'flush' | 'drop'; id: number };
export type AudioReply = { id: number; ok: true } | { id: number; ok: false; name: string; message: string };

/** An AudioWriter whose work runs in a worker, and which ends the worker once closed. */
export interface AudioSink extends AudioWriter {
  /** Ends the worker (after the last flush or drop). */
  close(): void;
}

/**
 * The raw-audio writer of a recording: in a worker of its own where workers exist (the page only
 * hands the blocks over, transferred: no copy, no IndexedDB work on its thread), else on this
 * thread with `connect` (unit tests in Node).
 */
export function createAudioSink(sessionId: string, sampleRateHz: number, connect: () => Promise<SessionDb>): AudioSink {
  if (!hasWorkers()) return { ...createAudioWriter(sessionId, sampleRateHz, connect), close: () => undefined };
  const worker = new Worker(new URL('./audio.worker.ts', import.meta.url), { type: 'module', name: 'audio' });
  const waiting = new Map<number, { resolve: () => void; reject: (e: Error) => void }>();
  let ids = 1;
  let failure: Error | null = null;
  worker.onmessage = (event: MessageEvent<AudioReply>) => {
    const r = event.data;
    const w = waiting.get(r.id);
    waiting.delete(r.id);
    if (!w) return;
    if (r.ok) w.resolve();
    else w.reject(Object.assign(new Error(r.message), { name: r.name }));
  };
  worker.onerror = (event) => {
    failure = new Error(`The audio worker failed: ${event.message || 'it could not start'}`);
    for (const w of waiting.values()) w.reject(failure);
    waiting.clear();
  };
  const ask = (type: 'flush' | 'drop'): Promise<void> =>
    failure
      ? Promise.reject(failure)
      : new Promise((resolve, reject) => {
          const id = ids++;
          waiting.set(id, { resolve, reject });
          worker.postMessage({ type, id } satisfies AudioRequest);
        });
  worker.postMessage({ type: 'open', sessionId, sampleRateHz } satisfies AudioRequest);
  return {
    append(block) {
      // The whole buffer is handed over when the block is all of it; a view is copied (a transfer would take the rest too).
      const own = block.byteOffset === 0 && block.byteLength === block.buffer.byteLength && block.buffer instanceof ArrayBuffer ? block : block.slice();
      worker.postMessage({ type: 'append', samples: own } satisfies AudioRequest, [own.buffer as ArrayBuffer]);
    },
    flush: () => ask('flush'),
    drop: () => ask('drop').catch(() => undefined),
    close: () => worker.terminate(),
  };
}
