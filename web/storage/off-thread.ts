/**
 * The page's side of the storage worker (store.worker.ts): a bundle import and the completion of
 * interrupted recordings run there, each in a worker of its own that ends with the job, so the
 * page never stalls and the memory they used is given back at once. Where workers are missing
 * (unit tests in Node) the same code runs on this thread.
 */
import { getSessionDb, recoverInterruptedSessions } from './sessions';
import { ImportError, importBundle, type ImportResult } from './import';
import { analyseStoredAudio } from './reanalyse';

export type StoreRequest = { id: number; type: 'import'; file: Blob } | { id: number; type: 'recover' };
export type StoreReply =
  | { id: number; ok: true; type: 'import'; result: ImportResult }
  | { id: number; ok: true; type: 'recover'; ids: string[] }
  | { id: number; ok: false; message: string; isImportError: boolean };

let nextId = 1;

/** Runs one job in a fresh storage worker; rejects with ImportError for a refused bundle. */
function runInWorker(request: StoreRequest): Promise<StoreReply & { ok: true }> {
  return new Promise((resolve, reject) => {
    const worker = new Worker(new URL('./store.worker.ts', import.meta.url), { type: 'module', name: 'storage' });
    const done = (): void => worker.terminate();
    worker.onmessage = (event: MessageEvent<StoreReply>) => {
      done();
      const reply = event.data;
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
