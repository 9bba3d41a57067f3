/**
 * The count stage's marginals, kept in its stage folder so the weight stage can run (or rerun) without
 * recounting. Little-endian binary, exact float64 bits:
 * "KDMARG01", u32 nRows, u32 nCols, f64 total, f64[nRows] rowSums, f64[nCols] colSums, u32[nRows] rowNnz.
 */
import { readFileSync } from 'node:fs';
import os from 'node:os';
import { KindredError } from '../errors.js';
import type { Marginals } from '../weight/types.js';
import { writeFileAtomic } from './atomic.js';

export const MARGINALS_FILE = 'marginals.bin';
const MAGIC = 'KDMARG01';
const HEADER = 24;

function assertLittleEndian(): void {
  if (os.endianness() !== 'LE') throw new Error('marginals files are little-endian; this machine is big-endian');
}

export async function writeMarginals(file: string, m: Marginals): Promise<void> {
  assertLittleEndian();
  const size = HEADER + 8 * m.nRows + 8 * m.nCols + 4 * m.nRows;
  const buf = Buffer.alloc(size);
  buf.write(MAGIC, 0, 'latin1');
  buf.writeUInt32LE(m.nRows, 8);
  buf.writeUInt32LE(m.nCols, 12);
  buf.writeDoubleLE(m.total, 16);
  let o = HEADER;
  Buffer.from(m.rowSums.buffer, m.rowSums.byteOffset, 8 * m.nRows).copy(buf, o);
  o += 8 * m.nRows;
  Buffer.from(m.colSums.buffer, m.colSums.byteOffset, 8 * m.nCols).copy(buf, o);
  o += 8 * m.nCols;
  Buffer.from(m.rowNnz.buffer, m.rowNnz.byteOffset, 4 * m.nRows).copy(buf, o);
  await writeFileAtomic(file, buf);
}

export function readMarginals(file: string): Marginals {
  assertLittleEndian();
  let buf: Buffer;
  try {
    buf = readFileSync(file);
  } catch (e) {
    throw new KindredError(`cannot read ${file}: ${(e as NodeJS.ErrnoException).code ?? String(e)}`);
  }
  if (buf.length < HEADER || buf.toString('latin1', 0, 8) !== MAGIC) throw new KindredError(`${file}: not a kindred marginals file`);
  const nRows = buf.readUInt32LE(8);
  const nCols = buf.readUInt32LE(12);
  if (buf.length !== HEADER + 12 * nRows + 8 * nCols) throw new KindredError(`${file}: truncated marginals file`);
  // copies: the typed arrays must be aligned, a Buffer from readFileSync need not be
  const slice = (offset: number, bytes: number): ArrayBuffer => buf.buffer.slice(buf.byteOffset + offset, buf.byteOffset + offset + bytes) as ArrayBuffer;
  let o = HEADER;
  const rowSums = new Float64Array(slice(o, 8 * nRows));
  o += 8 * nRows;
  const colSums = new Float64Array(slice(o, 8 * nCols));
  o += 8 * nCols;
  const rowNnz = new Uint32Array(slice(o, 4 * nRows));
  return { nRows, nCols, total: buf.readDoubleLE(16), rowSums, colSums, rowNnz };
}
