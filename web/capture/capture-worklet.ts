/**
 * Audio worklet of the capture: mixes the input to mono, gathers 128-sample render quanta into
 * blocks of about 0.1 s (live-block.ts) and posts each block (transferred, not copied) to the
 * analysis worker over the MessagePort it receives first. It has no outputs: nothing is played back.
 */
import { liveBlockSamples } from './live-block';

// The DOM library lacks the worklet scope; these are the few names used here.
declare class AudioWorkletProcessor {
  readonly port: MessagePort;
  constructor(options?: unknown);
}
declare function registerProcessor(name: string, ctor: new (options?: unknown) => AudioWorkletProcessor): void;
declare const sampleRate: number;

/** Samples per posted block at the context's rate (4480 at 44.1 kHz, 4864 at 48 kHz). */
const BLOCK_SAMPLES = liveBlockSamples(sampleRate);

class CaptureProcessor extends AudioWorkletProcessor {
  private target: MessagePort | null = null;
  private runId = 0;
  private block = new Float32Array(BLOCK_SAMPLES);
  private filled = 0;
  private isStopped = false;

  constructor(options?: unknown) {
    super(options);
    this.port.onmessage = (ev: MessageEvent) => {
      const data = ev.data as { type?: string; id?: number; port?: MessagePort };
      if (data.type === 'connect' && data.port && typeof data.id === 'number') {
        this.target = data.port;
        this.runId = data.id;
      } else if (data.type === 'stop') {
        this.isStopped = true;
        this.target?.close();
        this.target = null;
      }
    };
  }

  process(inputs: Float32Array[][]): boolean {
    if (this.isStopped) return false;
    const channels = inputs[0];
    if (!channels || channels.length === 0 || !this.target) return true;
    const n = channels[0].length;
    const scale = 1 / channels.length;
    for (let i = 0; i < n; i++) {
      let v = 0;
      for (let c = 0; c < channels.length; c++) v += channels[c][i];
      this.block[this.filled++] = v * scale;
      if (this.filled === BLOCK_SAMPLES) {
        const full = this.block;
        this.target.postMessage({ type: 'block', id: this.runId, samples: full }, [full.buffer]);
        // The posted buffer now belongs to the worker: start a new one (once per ~0.1 s, not per sample).
        this.block = new Float32Array(BLOCK_SAMPLES);
        this.filled = 0;
      }
    }
    return true;
  }
}

registerProcessor('humgauge-capture', CaptureProcessor);

// A module, so its names stay out of the global scope of the type check.
export {};
