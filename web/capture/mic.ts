/**
 * Microphone capture: getUserMedia with echo cancellation, noise suppression and automatic gain
 * control off (any of them would falsify growth and decay rates), an AudioContext and the capture
 * worklet, which posts sample blocks straight to the analysis worker over a MessagePort.
 */
import workletUrl from './capture-worklet.ts?worker&url';
import type { Scope } from '../lifecycle';

/** The three processing switches asked to be off, and what the browser reports for them. */
export const PROCESSING_KEYS = ['echoCancellation', 'noiseSuppression', 'autoGainControl'] as const;

export interface MicCapture {
  context: AudioContext;
  stream: MediaStream;
  track: MediaStreamTrack;
  sampleRateHz: number;
  /** What the browser reports for the track (sample rate, channel count, processing switches...). */
  settings: Record<string, unknown>;
  /** Processing the browser still applies although asked not to (e.g. ["autoGainControl"]). */
  processingStillOn: string[];
  deviceLabel: string;
  deviceId: string;
  /** Port to hand (transferred) to the analysis worker; the worklet posts blocks into its twin. */
  workerPort: MessagePort;
}

/** A capture failure with a message for the user (what happened and how to fix it). */
export class CaptureError extends Error {
  readonly kind: 'denied' | 'no-device' | 'busy' | 'insecure' | 'unsupported' | 'failed';
  constructor(kind: CaptureError['kind'], message: string) {
    super(message);
    this.kind = kind;
    this.name = 'CaptureError';
  }
}

/** User-facing text for a getUserMedia failure (DOMException names per the Media Capture spec). */
export function describeCaptureFailure(err: unknown): CaptureError {
  if (err instanceof CaptureError) return err;
  const name = err instanceof DOMException || err instanceof Error ? err.name : '';
  switch (name) {
    case 'NotAllowedError':
    case 'SecurityError':
    case 'PermissionDeniedError':
      return new CaptureError(
        'denied',
        'Microphone access is blocked for this app. To allow it: open the site settings (the icon left of the address bar), set Microphone to "Allow", then press Listen again. On a phone, also check that the browser itself may use the microphone (system settings → apps → browser → permissions).',
      );
    case 'NotFoundError':
    case 'DevicesNotFoundError':
    case 'OverconstrainedError':
      return new CaptureError('no-device', 'No microphone was found. Connect or enable a microphone (or a headset with one), then press Listen again. You can also open a recording instead.');
    case 'NotReadableError':
    case 'TrackStartError':
    case 'AbortError':
      return new CaptureError('busy', 'The microphone could not be started: another app may be using it. Close that app or call, then press Listen again.');
    default:
      return new CaptureError('failed', `The microphone could not be started (${err instanceof Error ? err.message : String(err)}).`);
  }
}

/**
 * Opens the microphone. Call from a click handler: the AudioContext is created (and resumed)
 * before the first await, so browsers that need a user gesture accept it.
 * Everything opened registers in `scope`; disposing the scope stops the capture.
 */
export async function openMicrophone(scope: Scope, runId: number, deviceId?: string): Promise<MicCapture> {
  if (!window.isSecureContext || !navigator.mediaDevices?.getUserMedia) {
    throw new CaptureError('insecure', 'This page cannot reach the microphone: it must be opened from a secure (https) address or installed as an app.');
  }
  if (typeof AudioWorkletNode === 'undefined') {
    throw new CaptureError('unsupported', 'This browser lacks audio worklets, which live listening needs. Open a recording instead, or use a current Chrome, Edge, Firefox or Safari.');
  }
  const context = new AudioContext({ latencyHint: 'interactive' });
  scope.add(() => context.close());
  const resumed = context.resume();

  let stream: MediaStream;
  try {
    stream = await navigator.mediaDevices.getUserMedia({
      audio: {
        echoCancellation: false,
        noiseSuppression: false,
        autoGainControl: false,
        ...(deviceId ? { deviceId: { exact: deviceId } } : {}),
      },
    });
  } catch (err) {
    throw describeCaptureFailure(err);
  }
  scope.add(() => {
    for (const t of stream.getTracks()) t.stop();
  });
  const track = stream.getAudioTracks()[0];
  if (!track) throw new CaptureError('no-device', 'The microphone gave no audio track. Connect a microphone and press Listen again.');

  await resumed;
  await context.audioWorklet.addModule(workletUrl);
  const source = context.createMediaStreamSource(stream);
  const node = new AudioWorkletNode(context, 'humgauge-capture', { numberOfInputs: 1, numberOfOutputs: 0, channelCountMode: 'explicit', channelCount: Math.max(1, Math.min(2, Number(track.getSettings().channelCount ?? 1))) });
  const channel = new MessageChannel();
  node.port.postMessage({ type: 'connect', id: runId, port: channel.port1 }, [channel.port1]);
  source.connect(node);
  scope.add(() => {
    node.port.postMessage({ type: 'stop' });
    source.disconnect();
    node.disconnect();
  });

  const settings = { ...(track.getSettings() as unknown as Record<string, unknown>) };
  const processingStillOn = PROCESSING_KEYS.filter((k) => settings[k] === true);
  return {
    context,
    stream,
    track,
    sampleRateHz: context.sampleRate,
    settings,
    processingStillOn,
    deviceLabel: track.label || 'microphone',
    deviceId: typeof settings.deviceId === 'string' ? settings.deviceId : '',
    workerPort: channel.port2,
  };
}

/** Keeps the screen on while listening, where the browser allows it; released when the scope ends. */
export async function keepScreenAwake(scope: Scope): Promise<boolean> {
  const wakeLock = (navigator as Navigator & { wakeLock?: { request(type: 'screen'): Promise<{ release(): Promise<void> }> } }).wakeLock;
  if (!wakeLock) return false;
  try {
    let sentinel = await wakeLock.request('screen');
    scope.add(() => sentinel.release());
    // The lock drops when the page is hidden; take it again when the page comes back.
    scope.listen(document, 'visibilitychange', () => {
      if (document.visibilityState === 'visible' && !scope.isDisposed) {
        wakeLock.request('screen').then((s) => {
          sentinel = s;
        }, () => undefined);
      }
    });
    return true;
  } catch {
    return false;
  }
}
