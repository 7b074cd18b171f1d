/// <reference lib="webworker" />
/**
 * The audio worker: writes one recording's raw audio to IndexedDB (audio-writer.ts) off the page's
 * thread. Blocks arrive transferred; each flush is answered with its id, or the browser's error
 * (its name and message, so the page can tell storage pressure and say what the browser said).
 */
import { openSessionDb, type SessionDb } from './db';
import { createAudioWriter, type AudioWriter } from './audio-writer';
import type { AudioReply, AudioRequest } from './off-thread';

declare const self: DedicatedWorkerGlobalScope;

let writer: AudioWriter | null = null;
let db: SessionDb | null = null;
/** A connection the browser closed after a failure is replaced at the next write. */
const connect = async (): Promise<SessionDb> => {
  if (!db) {
    db = await openSessionDb();
    db.addEventListener('close', () => {
      db = null;
    });
  }
  return db;
};

self.onmessage = async (event: MessageEvent<AudioRequest>) => {
  const req = event.data;
  if (req.type === 'open') {
    writer = createAudioWriter(req.sessionId, req.sampleRateHz, connect);
    return;
  }
  if (req.type === 'append') {
    writer?.append(req.samples);
    return;
  }
  let reply: AudioReply;
  try {
    if (req.type === 'flush') await writer?.flush();
    else await writer?.drop();
    reply = { id: req.id, ok: true };
  } catch (err) {
    const e = err as { name?: unknown; message?: unknown };
    reply = { id: req.id, ok: false, name: typeof e?.name === 'string' ? e.name : 'Error', message: typeof e?.message === 'string' ? e.message : String(err) };
  }
  self.postMessage(reply);
};
