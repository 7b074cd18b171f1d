/**
 * The page's side of the storage worker (store.worker.ts): a bundle import and the completion of
 * interrupted recordings run there, each in a worker of its own that ends with the job, so the
 * page never stalls and the memory they used is given back at once. Where workers are missing
 * (unit tests in Node) the same code runs on this thread.
 */
import { getSessionDb, recoverInterruptedSessions } from './sessions';
import { ImportError, importBundle, type ImportResult } from './import';
import { analyseStoredAudio, reanalyseInThread, type StoredAnalysisOptions } from './reanalyse';
import type { Report } from '../../dsp/types';
import { createAudioWriter, type AudioWriter } from './audio-writer';
import type { SessionDb } from './db';

export type StoreRequest =
  | { id: number; type: 'import'; file: Blob }
  | { id: number; type: 'recover' }
  | { id: number; type: 'reanalyse'; sessionId: string; options: StoredAnalysisOptions };
export type StoreReply =
  | { id: number; ok: true; type: 'import'; result: ImportResult }
  | { id: number; ok: true; type: 'recover'; ids: string[] }
  | { id: number; ok: true; type: 'reanalyse'; report: Report }
  | { id: number; ok: true; type: 'progress'; fraction: number }
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
