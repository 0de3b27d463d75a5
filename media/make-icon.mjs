// Draws the Saltus icon, media/icon.png (128x128 RGBA PNG), from geometry alone: no image
// library, no fonts, only node:zlib for the PNG's deflate stream.
// The glyph: a membrane trace that rises towards a dashed threshold, jumps back to rest at
// the crossing (a dot marks each spike) and rises again — Saltus's "jump" — in our own
// colours (deep teal ground, amber trace, coral spikes).
// Invariants: deterministic (same bytes on every run); 4x4 supersampling per pixel; the
// output is a valid PNG (signature, IHDR, one IDAT, IEND, CRC-32 on each chunk).
// Run: node media/make-icon.mjs [out.png]   (default: media/icon.png beside this file)
import { writeFileSync } from 'node:fs';
import { dirname, join } from 'node:path';
import { fileURLToPath } from 'node:url';
import { deflateSync } from 'node:zlib';

const SIZE = 128;
const SUB = 4; // supersamples per axis

const GROUND_TOP = [0x14, 0x4a, 0x57];
const GROUND_BOTTOM = [0x0a, 0x26, 0x2f];
const THRESHOLD = [0x7f, 0xc8, 0xc0];
const TRACE = [0xf4, 0xb9, 0x42];
const SPIKE = [0xff, 0x6f, 0x59];

const REST_Y = 100, THETA_Y = 36, X0 = 14, X1 = 116;
const CROSSINGS = [58, 100]; // x where the trace reaches the threshold and resets
const TRACE_HALF_WIDTH = 3.6, SPIKE_RADIUS = 7;

/** The trace as a polyline: exponential approach to an asymptote above the threshold, then a reset. */
function tracePoints() {
  const pts = [];
  const asymptote = THETA_Y - 7; // the rise would level off above the threshold
  let start = X0;
  for (const cross of [...CROSSINGS, X1]) {
    const reaches = cross !== X1;
    // choose the time constant so the curve meets THETA_Y exactly at x = cross
    const span = cross - start;
    const k = -Math.log((THETA_Y - asymptote) / (REST_Y - asymptote)) / span;
    for (let x = start; x <= cross + 1e-9; x += 0.5) {
      pts.push([x, asymptote + (REST_Y - asymptote) * Math.exp(-k * (x - start))]);
    }
    if (reaches) pts.push([cross, REST_Y]); // the jump back to rest
    start = cross;
  }
  return pts;
}

function distToSegment(px, py, [ax, ay], [bx, by]) {
  const dx = bx - ax, dy = by - ay;
  const len2 = dx * dx + dy * dy;
  const t = len2 === 0 ? 0 : Math.max(0, Math.min(1, ((px - ax) * dx + (py - ay) * dy) / len2));
  const cx = ax + t * dx - px, cy = ay + t * dy - py;
  return Math.sqrt(cx * cx + cy * cy);
}

function insideRoundedSquare(x, y, radius) {
  const cx = Math.min(Math.max(x, radius), SIZE - radius);
  const cy = Math.min(Math.max(y, radius), SIZE - radius);
  return (x - cx) ** 2 + (y - cy) ** 2 <= radius * radius;
}

/** Colour and coverage of one supersample: [r, g, b, a] with a in {0, 1}. */
function sample(x, y, trace) {
  if (!insideRoundedSquare(x, y, 26)) return [0, 0, 0, 0];
  const f = y / SIZE;
  let c = GROUND_TOP.map((v, i) => v + (GROUND_BOTTOM[i] - v) * f);
  // dashed threshold line, drawn under the trace
  if (Math.abs(y - THETA_Y) <= 1.2 && x > 10 && x < 118 && Math.floor((x - 10) / 6) % 2 === 0) {
    c = c.map((v, i) => v + (THRESHOLD[i] - v) * 0.55);
  }
  let d = Infinity;
  for (let i = 1; i < trace.length; i++) d = Math.min(d, distToSegment(x, y, trace[i - 1], trace[i]));
  if (d <= TRACE_HALF_WIDTH) c = TRACE;
  for (const cx of CROSSINGS) {
    const r = Math.hypot(x - cx, y - THETA_Y);
    if (r <= SPIKE_RADIUS + 2) c = r <= SPIKE_RADIUS ? SPIKE : GROUND_BOTTOM; // dark ring sets the dot apart
  }
  return [...c, 1];
}

function render() {
  const trace = tracePoints();
  const rgba = Buffer.alloc(SIZE * SIZE * 4);
  for (let py = 0; py < SIZE; py++) {
    for (let px = 0; px < SIZE; px++) {
      let r = 0, g = 0, b = 0, a = 0;
      for (let sy = 0; sy < SUB; sy++) {
        for (let sx = 0; sx < SUB; sx++) {
          const s = sample(px + (sx + 0.5) / SUB, py + (sy + 0.5) / SUB, trace);
          r += s[0] * s[3]; g += s[1] * s[3]; b += s[2] * s[3]; a += s[3];
        }
      }
      const o = (py * SIZE + px) * 4;
      if (a > 0) { rgba[o] = Math.round(r / a); rgba[o + 1] = Math.round(g / a); rgba[o + 2] = Math.round(b / a); }
      rgba[o + 3] = Math.round((255 * a) / (SUB * SUB));
    }
  }
  return rgba;
}

const CRC_TABLE = Array.from({ length: 256 }, (_, n) => {
  let c = n;
  for (let k = 0; k < 8; k++) c = c & 1 ? 0xedb88320 ^ (c >>> 1) : c >>> 1;
  return c >>> 0;
});

function crc32(buf) {
  let c = 0xffffffff;
  for (const byte of buf) c = CRC_TABLE[(c ^ byte) & 0xff] ^ (c >>> 8);
  return (c ^ 0xffffffff) >>> 0;
}

function chunk(type, data) {
  const len = Buffer.alloc(4);
  len.writeUInt32BE(data.length);
  const body = Buffer.concat([Buffer.from(type, 'ascii'), data]);
  const crc = Buffer.alloc(4);
  crc.writeUInt32BE(crc32(body));
  return Buffer.concat([len, body, crc]);
}

/** RGBA pixels (row-major) to PNG bytes: colour type 6, 8 bits, filter 0 on every row. */
export function encodePng(rgba, width, height) {
  const ihdr = Buffer.alloc(13);
  ihdr.writeUInt32BE(width, 0);
  ihdr.writeUInt32BE(height, 4);
  ihdr[8] = 8; ihdr[9] = 6; ihdr[10] = 0; ihdr[11] = 0; ihdr[12] = 0;
  const raw = Buffer.alloc((width * 4 + 1) * height);
  for (let y = 0; y < height; y++) rgba.copy(raw, y * (width * 4 + 1) + 1, y * width * 4, (y + 1) * width * 4);
  return Buffer.concat([
    Buffer.from([0x89, 0x50, 0x4e, 0x47, 0x0d, 0x0a, 0x1a, 0x0a]),
    chunk('IHDR', ihdr),
    chunk('IDAT', deflateSync(raw, { level: 9 })),
    chunk('IEND', Buffer.alloc(0)),
  ]);
}

const out = process.argv[2] ?? join(dirname(fileURLToPath(import.meta.url)), 'icon.png');
writeFileSync(out, encodePng(render(), SIZE, SIZE));
console.log(`icon: wrote ${out}`);
