// Draws the app icons (our own design: a tone whose amplitude grows, on a dark teal tile) and
// writes them as PNG files with Node's zlib: public/icons/icon-192.png, icon-512.png and
// icon-maskable-512.png (content kept inside the central 80 % safe zone). Run: node scripts/make-icons.mjs
import { deflateSync } from 'node:zlib';
import { mkdirSync, writeFileSync } from 'node:fs';

const BG = [11, 58, 74];
const WAVE = [255, 255, 255];
const FIT = [255, 155, 94];

// CRC-32 (ISO 3309 / PNG specification, Annex D).
const CRC_TABLE = new Uint32Array(256).map((_, n) => {
  let c = n;
  for (let k = 0; k < 8; k++) c = c & 1 ? 0xedb88320 ^ (c >>> 1) : c >>> 1;
  return c >>> 0;
});
function crc32(bytes) {
  let c = 0xffffffff;
  for (const b of bytes) c = CRC_TABLE[(c ^ b) & 0xff] ^ (c >>> 8);
  return (c ^ 0xffffffff) >>> 0;
}
function chunk(type, data) {
  const out = Buffer.alloc(12 + data.length);
  out.writeUInt32BE(data.length, 0);
  out.write(type, 4, 'ascii');
  data.copy(out, 8);
  out.writeUInt32BE(crc32(out.subarray(4, 8 + data.length)), 8 + data.length);
  return out;
}
/** PNG, 8-bit RGBA, no interlace (PNG specification, W3C 2003). */
function encodePng(size, rgba) {
  const ihdr = Buffer.alloc(13);
  ihdr.writeUInt32BE(size, 0);
  ihdr.writeUInt32BE(size, 4);
  ihdr[8] = 8;
  ihdr[9] = 6;
  const raw = Buffer.alloc((size * 4 + 1) * size);
  for (let y = 0; y < size; y++) {
    raw[y * (size * 4 + 1)] = 0;
    rgba.copy(raw, y * (size * 4 + 1) + 1, y * size * 4, (y + 1) * size * 4);
  }
  return Buffer.concat([
    Buffer.from([0x89, 0x50, 0x4e, 0x47, 0x0d, 0x0a, 0x1a, 0x0a]),
    chunk('IHDR', ihdr),
    chunk('IDAT', deflateSync(raw, { level: 9 })),
    chunk('IEND', Buffer.alloc(0)),
  ]);
}

/** Coverage (0-1) of a pixel by a stroke of half-width w around the polyline pts, 4×4 supersampled. */
function strokeCoverage(px, py, pts, w) {
  let hits = 0;
  for (let sy = 0; sy < 4; sy++) {
    for (let sx = 0; sx < 4; sx++) {
      const x = px + (sx + 0.5) / 4;
      const y = py + (sy + 0.5) / 4;
      let best = Infinity;
      // The polyline's x grows evenly with i: only segments within w of x can be near.
      const x0All = pts[0][0];
      const step = (pts[pts.length - 1][0] - x0All) / (pts.length - 1);
      const from = Math.max(1, Math.floor((x - w - x0All) / step));
      const to = Math.min(pts.length - 1, Math.ceil((x + w - x0All) / step) + 1);
      for (let i = from; i <= to; i++) {
        const [x0, y0] = pts[i - 1];
        const [x1, y1] = pts[i];
        if (Math.max(x0, x1) + w < x || Math.min(x0, x1) - w > x) continue;
        const dx = x1 - x0;
        const dy = y1 - y0;
        const t = Math.max(0, Math.min(1, ((x - x0) * dx + (y - y0) * dy) / (dx * dx + dy * dy)));
        const d = Math.hypot(x - (x0 + t * dx), y - (y0 + t * dy));
        if (d < best) best = d;
      }
      if (best <= w) hits++;
    }
  }
  return hits / 16;
}

function draw(size, isMaskable) {
  const rgba = Buffer.alloc(size * size * 4);
  // Content box: the whole tile, or the central 80 % for a maskable icon.
  const inset = isMaskable ? size * 0.14 : size * 0.1;
  const left = inset;
  const right = size - inset;
  const mid = size / 2;
  const halfH = (size / 2 - inset) * 0.85;
  const cycles = 5.5;
  const wave = [];
  const upper = [];
  const lower = [];
  for (let i = 0; i <= 600; i++) {
    const u = i / 600;
    const env = 0.06 + 0.94 * (Math.exp(3 * u) - 1) / (Math.exp(3) - 1);
    const x = left + u * (right - left);
    wave.push([x, mid - halfH * env * Math.sin(2 * Math.PI * cycles * u)]);
    upper.push([x, mid - halfH * env]);
    lower.push([x, mid + halfH * env]);
  }
  const radius = size * 0.2;
  for (let y = 0; y < size; y++) {
    for (let x = 0; x < size; x++) {
      const o = (y * size + x) * 4;
      // Rounded tile (maskable: full bleed, the platform applies its own mask).
      let inside = 1;
      if (!isMaskable) {
        const cx = Math.min(Math.max(x + 0.5, radius), size - radius);
        const cy = Math.min(Math.max(y + 0.5, radius), size - radius);
        inside = Math.max(0, Math.min(1, radius - Math.hypot(x + 0.5 - cx, y + 0.5 - cy) + 0.5));
      }
      let r = BG[0];
      let g = BG[1];
      let b = BG[2];
      const fit = Math.max(strokeCoverage(x, y, upper, size * 0.012), strokeCoverage(x, y, lower, size * 0.012));
      if (fit > 0) {
        r += (FIT[0] - r) * fit;
        g += (FIT[1] - g) * fit;
        b += (FIT[2] - b) * fit;
      }
      const cov = strokeCoverage(x, y, wave, size * 0.022);
      if (cov > 0) {
        r += (WAVE[0] - r) * cov;
        g += (WAVE[1] - g) * cov;
        b += (WAVE[2] - b) * cov;
      }
      rgba[o] = Math.round(r);
      rgba[o + 1] = Math.round(g);
      rgba[o + 2] = Math.round(b);
      rgba[o + 3] = Math.round(255 * inside);
    }
  }
  return encodePng(size, rgba);
}

mkdirSync('public/icons', { recursive: true });
for (const [name, size, isMaskable] of [
  ['icon-192.png', 192, false],
  ['icon-512.png', 512, false],
  ['icon-maskable-512.png', 512, true],
]) {
  const png = draw(size, isMaskable);
  writeFileSync(`public/icons/${name}`, png);
  console.log(`public/icons/${name}: ${png.length} bytes`);
}
