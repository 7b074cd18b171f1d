/**
 * A defensive reader of zip files for imports. The layout follows PKWARE's APPNOTE.TXT (".ZIP File
 * Format Specification", version 6.3.x): end-of-central-directory record, central directory, local
 * headers; methods 0 (stored) and 8 (deflate, inflated with fflate). Before anything is inflated
 * the declared sizes are checked against limits, and inflation itself is metered, so a file whose
 * headers understate its contents (a "zip bomb") is stopped at the limit, not after it.
 */
import { Inflate } from 'fflate';

export class ZipError extends Error {
  constructor(message: string) {
    super(message);
    this.name = 'ZipError';
  }
}

export interface ZipLimits {
  /** Largest accepted zip file, bytes (checked before any of it is read). */
  maxZipBytes: number;
  /** Most entries accepted. */
  maxEntries: number;
  /** Largest inflated size of one entry, bytes (the reader of each kind of entry may ask for less). */
  maxEntryBytes: number;
  /** Largest inflated size of all entries declared, bytes. */
  maxTotalBytes: number;
}

/**
 * Limits sized to what sessions need (REFERENCES.md §81): an hour of 48 kHz audio is 346 MB as
 * 16-bit PCM and 691 MB as float32, so 1 GiB holds an hour of float audio with its track; the
 * directory of a bundle of 1000 sessions holds 4 entries each.
 */
export const DEFAULT_ZIP_LIMITS: ZipLimits = {
  maxZipBytes: 1024 * 1024 * 1024,
  maxEntries: 5000,
  maxEntryBytes: 1024 * 1024 * 1024,
  maxTotalBytes: 1536 * 1024 * 1024,
};

/** Random access to the bytes of a zip: a file (Blob) is read piece by piece, never whole. */
export interface ByteSource {
  readonly size: number;
  read(offset: number, length: number): Promise<Uint8Array>;
}

/** A source over bytes already in memory. */
export function bytesSource(bytes: Uint8Array): ByteSource {
  return { size: bytes.length, read: async (offset, length) => bytes.subarray(offset, Math.min(bytes.length, offset + length)) };
}

/** A source over a file or blob, read slice by slice. */
export function blobSource(blob: Blob): ByteSource {
  return { size: blob.size, read: async (offset, length) => new Uint8Array(await blob.slice(offset, Math.min(blob.size, offset + length)).arrayBuffer()) };
}

let crcTable: Uint32Array | null = null;

/** CRC-32 of ISO 3309 / ITU-T V.42 (polynomial 0xEDB88320, reflected), as zip uses it. */
export function crc32(data: Uint8Array): number {
  if (!crcTable) {
    crcTable = new Uint32Array(256);
    for (let n = 0; n < 256; n++) {
      let c = n;
      for (let k = 0; k < 8; k++) c = c & 1 ? 0xedb88320 ^ (c >>> 1) : c >>> 1;
      crcTable[n] = c >>> 0;
    }
  }
  let crc = 0xffffffff;
  for (let i = 0; i < data.length; i++) crc = crcTable[(crc ^ data[i]) & 0xff] ^ (crc >>> 8);
  return (crc ^ 0xffffffff) >>> 0;
}

export interface ZipEntry {
  name: string;
  method: number;
  compressedSize: number;
  size: number;
  crc: number;
  localOffset: number;
}

const SIG_EOCD = 0x06054b50;
const SIG_CENTRAL = 0x02014b50;
const SIG_LOCAL = 0x04034b50;
/**
 * Inflate input is fed in pieces this big, so output beyond the declared size is caught within
 * one piece (deflate expands at most ~1032×, so at most ~17 MB). Smaller pieces cost speed
 * (measured with fflate 0.8.3: 4 KiB pieces inflate ~6× slower than 16 KiB).
 */
const INFLATE_PIECE_BYTES = 16_384;
/** Compressed bytes read from the source at a time, bytes. */
const READ_PIECE_BYTES = 1024 * 1024;
/** Longest end-of-directory record: 22 bytes plus a comment of at most 65535 bytes (APPNOTE 4.3.16). */
const MAX_EOCD_BYTES = 22 + 65_535;

function safeName(raw: Uint8Array): string {
  let name: string;
  try {
    name = new TextDecoder('utf-8', { fatal: true }).decode(raw);
  } catch {
    throw new ZipError('A file name inside the zip is not valid UTF-8.');
  }
  if (!name || name.length > 300) throw new ZipError('A file name inside the zip is empty or too long.');
  // eslint-disable-next-line no-control-regex
  if (/[\u0000-\u001f\\]/.test(name) || name.startsWith('/') || /^[A-Za-z]:/.test(name) || name.split('/').some((p) => p === '..' || p === '.')) {
    throw new ZipError(`The zip holds a file with an unsafe name: ${JSON.stringify(name.slice(0, 80))}.`);
  }
  return name;
}

/** Human size for messages: "1.2 GB", "340 kB". */
export function formatBytes(n: number): string {
  if (n >= 1e9) return `${(n / 1e9).toFixed(1)} GB`;
  if (n >= 1e6) return `${(n / 1e6).toFixed(1)} MB`;
  if (n >= 1e3) return `${(n / 1e3).toFixed(0)} kB`;
  return `${n} bytes`;
}

/**
 * Lists the entries from the central directory, checking every declared size against the limits.
 * Reads only the end of the file and its directory.
 */
export async function listZip(source: ByteSource, limits: ZipLimits = DEFAULT_ZIP_LIMITS): Promise<ZipEntry[]> {
  const fileSize = source.size;
  if (fileSize > limits.maxZipBytes) throw new ZipError(`The file is ${formatBytes(fileSize)}, more than the ${formatBytes(limits.maxZipBytes)} a bundle may be.`);
  if (fileSize < 22) throw new ZipError('This is not a zip file (too short).');
  const tailStart = Math.max(0, fileSize - MAX_EOCD_BYTES);
  const tail = await source.read(tailStart, fileSize - tailStart);
  const tv = new DataView(tail.buffer, tail.byteOffset, tail.byteLength);
  let at = -1;
  for (let i = tail.length - 22; i >= 0; i--) {
    if (tv.getUint32(i, true) === SIG_EOCD) {
      at = i;
      break;
    }
  }
  if (at < 0) throw new ZipError('This is not a zip file (no end-of-directory record).');
  const eocd = tailStart + at;
  const count = tv.getUint16(at + 10, true);
  const cdSize = tv.getUint32(at + 12, true);
  const cdOffset = tv.getUint32(at + 16, true);
  if (count === 0xffff || cdOffset === 0xffffffff) throw new ZipError('Zip64 files are not accepted.');
  if (count > limits.maxEntries) throw new ZipError(`The zip holds ${count} files, more than the ${limits.maxEntries} accepted.`);
  if (cdOffset + cdSize > eocd) throw new ZipError('The zip is damaged (its directory lies outside the file).');
  // A directory record is at most 46 + 3 × 65535 bytes; with the entry count bounded, so is the directory.
  const cd = await source.read(cdOffset, cdSize);
  const dv = new DataView(cd.buffer, cd.byteOffset, cd.byteLength);
  const entries: ZipEntry[] = [];
  const seen = new Set<string>();
  let p = 0;
  let total = 0;
  for (let k = 0; k < count; k++) {
    if (p + 46 > cd.length || dv.getUint32(p, true) !== SIG_CENTRAL) throw new ZipError('The zip is damaged (bad directory entry).');
    const flags = dv.getUint16(p + 8, true);
    const method = dv.getUint16(p + 10, true);
    const crc = dv.getUint32(p + 16, true);
    const compressedSize = dv.getUint32(p + 20, true);
    const size = dv.getUint32(p + 24, true);
    const nameLen = dv.getUint16(p + 28, true);
    const extraLen = dv.getUint16(p + 30, true);
    const commentLen = dv.getUint16(p + 32, true);
    const localOffset = dv.getUint32(p + 42, true);
    if (p + 46 + nameLen > cd.length) throw new ZipError('The zip is damaged (bad directory entry).');
    const name = safeName(cd.subarray(p + 46, p + 46 + nameLen));
    p += 46 + nameLen + extraLen + commentLen;
    if (flags & 1) throw new ZipError(`${name} is encrypted; encrypted zips are not accepted.`);
    if (method !== 0 && method !== 8) throw new ZipError(`${name} uses compression method ${method}; only stored and deflate are accepted.`);
    if (seen.has(name)) throw new ZipError(`The zip holds ${name} twice.`);
    seen.add(name);
    if (name.endsWith('/')) continue;
    if (size > limits.maxEntryBytes) throw new ZipError(`${name} would expand to ${size} bytes, more than the ${limits.maxEntryBytes} bytes accepted.`);
    total += size;
    if (total > limits.maxTotalBytes) throw new ZipError(`The zip would expand to more than the ${limits.maxTotalBytes} bytes accepted.`);
    if (localOffset + 30 + compressedSize > cdOffset) throw new ZipError(`The zip is damaged (${name} lies outside the file).`);
    entries.push({ name, method, compressedSize, size, crc, localOffset });
  }
  return entries;
}

/**
 * Reads one entry, at most `maxBytes` of it inflated (`what` names it in messages). The declared
 * size is checked first; compressed data is then read and inflated piece by piece, and inflation
 * stops as soon as the output passes the declared size. The CRC-32 must match.
 */
export async function readZipEntry(source: ByteSource, entry: ZipEntry, maxBytes = Infinity, what = entry.name): Promise<Uint8Array> {
  if (entry.size > maxBytes) {
    throw new ZipError(`${entry.name} would expand to ${formatBytes(entry.size)}, more than the ${formatBytes(maxBytes)} ${what} can need: this is not a bundle the app wrote, or it is damaged.`);
  }
  const header = await source.read(entry.localOffset, 30);
  const hv = new DataView(header.buffer, header.byteOffset, header.byteLength);
  if (header.length < 30 || hv.getUint32(0, true) !== SIG_LOCAL) throw new ZipError(`The zip is damaged (no local header for ${entry.name}).`);
  const start = entry.localOffset + 30 + hv.getUint16(26, true) + hv.getUint16(28, true);
  const end = start + entry.compressedSize;
  if (end > source.size) throw new ZipError(`The zip is damaged (${entry.name} is cut short).`);
  let out: Uint8Array;
  if (entry.method === 0) {
    if (entry.compressedSize !== entry.size) throw new ZipError(`The zip is damaged (${entry.name} sizes disagree).`);
    out = await source.read(start, entry.size);
  } else {
    out = new Uint8Array(entry.size);
    let filled = 0;
    let isFinal = false;
    const inflater = new Inflate((chunk, final) => {
      if (filled + chunk.length > entry.size) {
        throw new ZipError(`The zip is damaged or hostile: ${entry.name} inflates beyond the ${entry.size} bytes its header declares.`);
      }
      out.set(chunk, filled);
      filled += chunk.length;
      if (final) isFinal = true;
    });
    try {
      for (let off = start; off < end; off += READ_PIECE_BYTES) {
        const raw = await source.read(off, Math.min(READ_PIECE_BYTES, end - off));
        const isLastRead = off + READ_PIECE_BYTES >= end;
        for (let i = 0; i < raw.length; i += INFLATE_PIECE_BYTES) {
          inflater.push(raw.subarray(i, Math.min(raw.length, i + INFLATE_PIECE_BYTES)), isLastRead && i + INFLATE_PIECE_BYTES >= raw.length);
        }
      }
      if (start === end) inflater.push(new Uint8Array(0), true);
    } catch (err) {
      if (err instanceof ZipError) throw err;
      throw new ZipError(`The zip is damaged (${entry.name} does not inflate: ${err instanceof Error ? err.message : String(err)}).`);
    }
    if (!isFinal || filled !== entry.size) throw new ZipError(`The zip is damaged (${entry.name} is shorter than declared).`);
  }
  if (crc32(out) !== entry.crc) throw new ZipError(`The zip is damaged (${entry.name} fails its CRC-32 check).`);
  return out;
}
