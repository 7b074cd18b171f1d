import { describe, expect, it } from 'vitest';
import { decodeAudioFile, FileProblem } from '../../web/capture/file-input';

/**
 * An 8-bit A-law WAV in WAVE_FORMAT_EXTENSIBLE (Microsoft, "Multiple channel audio data and WAVE
 * files": fmt chunk of 40 bytes, format tag 0xFFFE, sub-format GUID whose first two bytes are the
 * format tag, here 6 = A-law per RFC 2361 Appendix A). Samples are A-law silence (0xD5, ITU-T G.711).
 */
function extensibleAlawWav(sampleRateHz: number, frames: number): Uint8Array {
  const bytes = new Uint8Array(12 + 8 + 40 + 8 + frames);
  const v = new DataView(bytes.buffer);
  const tag = (at: number, s: string): void => {
    for (let i = 0; i < 4; i++) bytes[at + i] = s.charCodeAt(i);
  };
  tag(0, 'RIFF');
  v.setUint32(4, bytes.length - 8, true);
  tag(8, 'WAVE');
  tag(12, 'fmt ');
  v.setUint32(16, 40, true);
  v.setUint16(20, 0xfffe, true);
  v.setUint16(22, 1, true);
  v.setUint32(24, sampleRateHz, true);
  v.setUint32(28, sampleRateHz, true);
  v.setUint16(32, 1, true);
  v.setUint16(34, 8, true);
  v.setUint16(36, 22, true);
  v.setUint16(38, 8, true);
  v.setUint32(40, 4, true);
  v.setUint16(44, 6, true);
  [0x00, 0x00, 0x00, 0x00, 0x10, 0x00, 0x80, 0x00, 0x00, 0xaa, 0x00, 0x38, 0x9b, 0x71].forEach((x, i) => (bytes[46 + i] = x));
  tag(60, 'data');
  v.setUint32(64, frames, true);
  bytes.fill(0xd5, 68);
  return bytes;
}

describe('opening a WAV whose encoding the analysis does not read', () => {
  it('names the encoding, as the command line does, when no decoder can open it', async () => {
    const file = new File([extensibleAlawWav(8000, 8000) as Uint8Array<ArrayBuffer>], 'burner-alaw.wav');
    // Node has no OfflineAudioContext: the browser fallback is unavailable, as on a browser whose decoder refuses the file.
    const err = await decodeAudioFile(file).catch((e: unknown) => e);
    expect(err).toBeInstanceOf(FileProblem);
    expect((err as Error).message).toMatch(/burner-alaw\.wav/);
    expect((err as Error).message).toMatch(/A-law, format tag 6 \(0x0006\)/);
    expect((err as Error).message).toMatch(/convert to PCM or float WAV/);
  });
});
