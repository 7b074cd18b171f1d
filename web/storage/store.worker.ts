/// <reference lib="webworker" />
/**
 * The storage worker: imports a bundle (unzip, validation, writing) and completes interrupted
 * recordings (their analysis run again over stored audio) off the page's thread, so neither
 * stalls the page. It opens its own database connection for each job and closes it after.
 */
import { openSessionDb } from './db';
import { ImportError, importBundle } from './import';
import { analyseStoredAudio } from './reanalyse';
import { recoverInterruptedSessions } from './sessions';
import type { StoreReply, StoreRequest } from './off-thread';

declare const self: DedicatedWorkerGlobalScope;

self.onmessage = async (event: MessageEvent<StoreRequest>) => {
  const req = event.data;
  let reply: StoreReply;
  try {
    const db = await openSessionDb();
    try {
      reply = req.type === 'import' ? { id: req.id, ok: true, type: 'import', result: await importBundle(db, req.file) } : { id: req.id, ok: true, type: 'recover', ids: await recoverInterruptedSessions(db, analyseStoredAudio) };
    } finally {
      db.close();
    }
  } catch (err) {
    reply = { id: req.id, ok: false, message: err instanceof Error ? err.message : String(err), isImportError: err instanceof ImportError };
  }
  self.postMessage(reply);
};
