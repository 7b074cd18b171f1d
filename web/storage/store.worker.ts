/// <reference lib="webworker" />
/**
 * The storage worker: imports a bundle (unzip, validation, writing), completes interrupted
 * recordings and re-analyses a stored session (the analysis run again over its stored audio) off
 * the page's thread, so none of them stalls the page; it also answers the Sessions screen's reads
 * and edits (store-methods.ts). It opens its own database connection for each job and closes it after.
 */
import { openSessionDb } from './db';
import { ImportError, importBundle } from './import';
import { analyseStoredAudio, reanalyseInThread } from './reanalyse';
import { recoverInterruptedSessions } from './sessions';
import type { StoreReply, StoreRequest } from './off-thread';
import { STORE_METHODS, transferablesOfValue } from './store-methods';

declare const self: DedicatedWorkerGlobalScope;

self.onmessage = async (event: MessageEvent<StoreRequest>) => {
  const req = event.data;
  let reply: StoreReply;
  try {
    const db = await openSessionDb();
    try {
      if (req.type === 'import') reply = { id: req.id, ok: true, type: 'import', result: await importBundle(db, req.file) };
      else if (req.type === 'recover') reply = { id: req.id, ok: true, type: 'recover', ids: await recoverInterruptedSessions(db, analyseStoredAudio) };
      else if (req.type === 'call') {
        const fn = STORE_METHODS[req.method] as (d: typeof db, ...a: unknown[]) => Promise<unknown>;
        const value = await fn(db, ...req.args);
        self.postMessage({ id: req.id, ok: true, type: 'call', value } satisfies StoreReply, transferablesOfValue(value));
        return;
      } else {
        const progress = (fraction: number): void => self.postMessage({ id: req.id, ok: true, type: 'progress', fraction } satisfies StoreReply);
        reply = { id: req.id, ok: true, type: 'reanalyse', report: await reanalyseInThread(db, req.sessionId, req.options, progress) };
      }
    } finally {
      db.close();
    }
  } catch (err) {
    reply = { id: req.id, ok: false, message: err instanceof Error ? err.message : String(err), isImportError: err instanceof ImportError };
  }
  self.postMessage(reply);
};
