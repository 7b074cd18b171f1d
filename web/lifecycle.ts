/**
 * A small disposal scope: the microphone, the audio context, the worker, wake locks, timers and
 * listeners of one listening run register here, so stopping the run frees all of them, in reverse
 * order of registration, even when one of them fails to stop.
 */
export interface Scope {
  /** Registers a clean-up; returns a function that runs it early (and only once). */
  add(dispose: () => void | Promise<void>): () => Promise<void>;
  /** Adds an event listener and removes it when the scope ends. */
  listen<K extends string>(target: EventTarget, type: K, fn: (ev: Event) => void, options?: AddEventListenerOptions): void;
  /** True once dispose() has started. */
  readonly isDisposed: boolean;
  /** Runs every clean-up (latest first). Errors are collected and returned, never thrown. */
  dispose(): Promise<string[]>;
}

/** Creates an empty scope. */
export function createScope(): Scope {
  const cleanups: { fn: () => void | Promise<void>; isDone: boolean }[] = [];
  let isDisposed = false;

  async function runOne(entry: { fn: () => void | Promise<void>; isDone: boolean }): Promise<string | null> {
    if (entry.isDone) return null;
    entry.isDone = true;
    try {
      await entry.fn();
      return null;
    } catch (err) {
      return err instanceof Error ? err.message : String(err);
    }
  }

  return {
    add(fn) {
      const entry = { fn, isDone: false };
      if (isDisposed) {
        void runOne(entry);
      } else {
        cleanups.push(entry);
      }
      return async () => {
        await runOne(entry);
      };
    },
    listen(target, type, fn, options) {
      target.addEventListener(type, fn, options);
      this.add(() => target.removeEventListener(type, fn, options));
    },
    get isDisposed() {
      return isDisposed;
    },
    async dispose() {
      isDisposed = true;
      const errors: string[] = [];
      while (cleanups.length) {
        const entry = cleanups.pop();
        if (!entry) break;
        const err = await runOne(entry);
        if (err) errors.push(err);
      }
      return errors;
    },
  };
}
