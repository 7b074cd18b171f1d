/**
 * The app's side of the analysis worker: one worker, started on first use, whose messages are
 * handed to a single listener. A worker that failed at top level is dropped; the next request
 * starts a fresh one. The audio an update carries reaches the listener first, as `audio` messages.
 */
import { isFromWorker, transferablesOf, type FromWorker, type ToWorker } from '../worker/protocol';

export interface WorkerClient {
  send(message: ToWorker): void;
  /** Stops the worker (a later send starts a fresh one). */
  terminate(): void;
}

/**
 * `onMessage` receives every well-formed message; `onCrash` the message of an error the worker
 * did not catch (the worker is then discarded).
 */
export function createWorkerClient(onMessage: (m: FromWorker) => void, onCrash: (message: string) => void): WorkerClient {
  let worker: Worker | null = null;
  const ensure = (): Worker => {
    if (worker) return worker;
    const w = new Worker(new URL('../worker/analysis.worker.ts', import.meta.url), { type: 'module', name: 'analysis' });
    w.onmessage = (ev: MessageEvent) => {
      if (!isFromWorker(ev.data)) return;
      const m = ev.data;
      if (m.type === 'update' && Array.isArray(m.audio)) for (const samples of m.audio) if (samples instanceof Float32Array) onMessage({ type: 'audio', id: m.id, samples });
      onMessage(m);
    };
    w.onerror = (ev) => {
      ev.preventDefault();
      w.terminate();
      if (worker === w) worker = null;
      onCrash(ev.message || 'unknown');
    };
    worker = w;
    return w;
  };
  return {
    send(message) {
      ensure().postMessage(message, transferablesOf(message));
    },
    terminate() {
      worker?.terminate();
      worker = null;
    },
  };
}
