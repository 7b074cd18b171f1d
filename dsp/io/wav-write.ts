/**
 * Encodes mono or multi-channel samples (−1..1 full scale) as a RIFF/WAVE file: PCM 16-bit or
 * 32-bit IEEE float (WAVE format tags 1 and 3, Microsoft/IBM "Multimedia Programming Interface
 * and Data Specifications 1.0", 1991). Values beyond full scale are clipped for PCM.
 */
export function encodeWav(channels: Float32Array | Float32Array[], sampleRateHz: number, format: 'pcm16' | 'float32' = 'pcm16'): Uint8Array {
  const chans = Array.isArray(channels) ? channels : [channels];
  if (chans.length === 0) throw new RangeError('encodeWav: at least one channel is required');
  const frames = chans[0].length;
  for (const c of chans) if (c.length !== frames) throw new RangeError('encodeWav: channels differ in length');
  if (!(sampleRateHz > 0) || !Number.isInteger(sampleRateHz)) throw new RangeError(`encodeWav: sampleRateHz must be a positive integer, got ${sampleRateHz}`);
  const bytesPerSample = format === 'pcm16' ? 2 : 4;
  const blockAlign = bytesPerSample * chans.length;
  const dataBytes = frames * blockAlign;
  const buf = new ArrayBuffer(44 + dataBytes);
  const v = new DataView(buf);
  const tag = (off: number, s: string): void => {
    for (let i = 0; i < 4; i++) v.setUint8(off + i, s.charCodeAt(i));
  };
  tag(0, 'RIFF');
  v.setUint32(4, 36 + dataBytes, true);
  tag(8, 'WAVE');
  tag(12, 'fmt ');
  v.setUint32(16, 16, true);
  v.setUint16(20, format === 'pcm16' ? 1 : 3, true);
  v.setUint16(22, chans.length, true);
  v.setUint32(24, sampleRateHz, true);
  v.setUint32(28, sampleRateHz * blockAlign, true);
  v.setUint16(32, blockAlign, true);
  v.setUint16(34, bytesPerSample * 8, true);
  tag(36, 'data');
  v.setUint32(40, dataBytes, true);
  let off = 44;
  for (let i = 0; i < frames; i++) {
    for (const c of chans) {
      const x = c[i];
      if (format === 'pcm16') {
        const s = Math.max(-1, Math.min(1, Number.isFinite(x) ? x : 0));
        v.setInt16(off, Math.round(s < 0 ? s * 32768 : s * 32767), true);
      } else v.setFloat32(off, x, true);
      off += bytesPerSample;
    }
  }
  return new Uint8Array(buf);
}
