import { describe, expect, it } from 'vitest';
import { secondChunks } from '../../web/storage/audio-writer';

/** Seeded blocks of the given lengths holding consecutive sample numbers (so order and loss show). */
function blocksOf(lengths: number[]): Float32Array[] {
  let k = 0;
  return lengths.map((n) => Float32Array.from({ length: n }, () => k++));
}

const joined = (xs: readonly Float32Array[]): number[] => xs.flatMap((x) => Array.from(x));

describe('audio chunks for the session store', () => {
  it('keeps every sample in order in chunks of at most a second, all full but the last (round trip over 100 seeded cases: common practice)', () => {
    let seed = 11;
    const rand = (): number => (seed = (seed * 1664525 + 1013904223) >>> 0) / 4294967296;
    for (let c = 0; c < 100; c++) {
      const max = 1 + Math.floor(rand() * 50);
      const lengths = Array.from({ length: Math.floor(rand() * 8) }, () => (rand() < 0.3 ? max : Math.floor(rand() * 2 * max)));
      const blocks = blocksOf(lengths);
      const expected = joined(blocks);
      const chunks = secondChunks(blocks, max);
      expect(joined(chunks)).toEqual(expected);
      chunks.forEach((ch, i) => {
        expect(ch.length).toBeGreaterThan(0);
        if (i < chunks.length - 1) expect(ch.length).toBe(max);
        else expect(ch.length).toBeLessThanOrEqual(max);
      });
    }
  });

  it('stores whole one-second blocks as they are (no copy), and copies views and short blocks', () => {
    const [a, b, tail] = blocksOf([4, 4, 3]) as [Float32Array, Float32Array, Float32Array];
    const chunks = secondChunks([a, b, tail], 4);
    expect(chunks[0]).toBe(a);
    expect(chunks[1]).toBe(b);
    expect(chunks[2]).toBe(tail);
    // A short block before a whole one shifts the chunk boundaries: everything after it is copied.
    const [s, w] = blocksOf([2, 4]) as [Float32Array, Float32Array];
    const shifted = secondChunks([s, w], 4);
    expect(shifted.map((x) => x.length)).toEqual([4, 2]);
    expect(shifted[0]).not.toBe(w);
    // A view shares its buffer with other samples: stored as a copy.
    const big = Float32Array.from({ length: 8 }, (_, i) => i);
    const view = big.subarray(0, 4);
    const [stored] = secondChunks([view], 4);
    expect(stored).not.toBe(view);
    expect(Array.from(stored ?? [])).toEqual([0, 1, 2, 3]);
  });
});
