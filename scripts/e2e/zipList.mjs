// Lists the entries of a .zip file (a .vsix is one) from its central directory, so the
// packaging script can check what went into the package without an unzip program.
// Invariants: reads only the end-of-central-directory record and the central directory;
// throws a clear error on anything that is not a single-volume zip; no ZIP64 support
// (a .vsix of ours is far below 4 GiB and 65535 entries).
import { readFileSync } from 'node:fs';

/** @returns {{ name: string, size: number, compressedSize: number }[]} */
export function listZip(file) {
  const buf = readFileSync(file);
  const EOCD = 0x06054b50, CEN = 0x02014b50;
  let eocd = -1;
  for (let i = buf.length - 22; i >= Math.max(0, buf.length - 22 - 0xffff); i--) {
    if (buf.readUInt32LE(i) === EOCD) { eocd = i; break; }
  }
  if (eocd < 0) throw new Error(`${file}: not a zip file (no end-of-central-directory record)`);
  const count = buf.readUInt16LE(eocd + 10);
  let p = buf.readUInt32LE(eocd + 16);
  const entries = [];
  for (let n = 0; n < count; n++) {
    if (p + 46 > buf.length || buf.readUInt32LE(p) !== CEN) throw new Error(`${file}: damaged central directory at entry ${n}`);
    const compressedSize = buf.readUInt32LE(p + 20), size = buf.readUInt32LE(p + 24);
    const nameLen = buf.readUInt16LE(p + 28), extraLen = buf.readUInt16LE(p + 30), commentLen = buf.readUInt16LE(p + 32);
    entries.push({ name: buf.toString('utf8', p + 46, p + 46 + nameLen), size, compressedSize });
    p += 46 + nameLen + extraLen + commentLen;
  }
  return entries;
}
