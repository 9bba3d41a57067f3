import { openSync, writeSync, readSync, closeSync } from 'node:fs';
import { wrapWriteError } from '../store/atomic.js';

/** A spilled run: sorted (row u32, col u32, value f64) records, 16 bytes each, little-endian. */
const RECORD = 16;
const BUFFER_RECORDS = 1 << 16;

export class RunWriter {
  private readonly fd: number;
  private readonly buf = Buffer.allocUnsafe(RECORD * BUFFER_RECORDS);
  private fill = 0;
  records = 0;

  constructor(readonly file: string) {
    try {
      this.fd = openSync(file, 'w');
    } catch (e) {
      throw wrapWriteError(e, file);
    }
  }

  append(row: number, col: number, value: number): void {
    const o = this.fill * RECORD;
    this.buf.writeUInt32LE(row, o);
    this.buf.writeUInt32LE(col, o + 4);
    this.buf.writeDoubleLE(value, o + 8);
    this.records++;
    if (++this.fill === BUFFER_RECORDS) this.flush();
  }

  private flush(): void {
    try {
      writeSync(this.fd, this.buf, 0, this.fill * RECORD);
    } catch (e) {
      throw wrapWriteError(e, this.file);
    }
    this.fill = 0;
  }

  close(): void {
    this.flush();
    closeSync(this.fd);
  }
}

/** Reads a run record by record through a fixed buffer. */
export class RunReader {
  private readonly fd: number;
  private readonly buf = Buffer.allocUnsafe(RECORD * BUFFER_RECORDS);
  private have = 0;
  private at = 0;
  row = 0;
  col = 0;
  value = 0;
  done = false;

  constructor(readonly file: string) {
    this.fd = openSync(file, 'r');
    this.advance();
  }

  /** Moves to the next record; sets done at the end. */
  advance(): void {
    if (this.at === this.have) {
      const bytes = readSync(this.fd, this.buf, 0, this.buf.length, null);
      this.have = Math.floor(bytes / RECORD);
      this.at = 0;
      if (this.have === 0) {
        this.done = true;
        closeSync(this.fd);
        return;
      }
    }
    const o = this.at * RECORD;
    this.row = this.buf.readUInt32LE(o);
    this.col = this.buf.readUInt32LE(o + 4);
    this.value = this.buf.readDoubleLE(o + 8);
    this.at++;
  }
}

/**
 * k-way merge of sorted runs, summing equal (row, col) keys; emits in (row, col) order.
 * A binary heap over run indices keyed by row * nCols + col.
 */
export function mergeRuns(files: string[], nCols: number, emit: (row: number, col: number, value: number) => void): void {
  const readers = files.map((f) => new RunReader(f)).filter((r) => !r.done);
  const key = (r: RunReader): number => r.row * nCols + r.col;
  const heap = readers.slice();
  const less = (a: RunReader, b: RunReader): boolean => key(a) < key(b);
  const down = (i: number): void => {
    for (;;) {
      const l = 2 * i + 1;
      const r = l + 1;
      let m = i;
      if (l < heap.length && less(heap[l], heap[m])) m = l;
      if (r < heap.length && less(heap[r], heap[m])) m = r;
      if (m === i) return;
      [heap[i], heap[m]] = [heap[m], heap[i]];
      i = m;
    }
  };
  for (let i = (heap.length >> 1) - 1; i >= 0; i--) down(i);
  let curRow = -1;
  let curCol = -1;
  let sum = 0;
  while (heap.length > 0) {
    const top = heap[0];
    if (top.row === curRow && top.col === curCol) {
      sum += top.value;
    } else {
      if (curRow >= 0) emit(curRow, curCol, sum);
      curRow = top.row;
      curCol = top.col;
      sum = top.value;
    }
    top.advance();
    if (top.done) {
      const last = heap.pop()!;
      if (heap.length > 0 && last !== top) heap[0] = last;
    }
    if (heap.length > 0) down(0);
  }
  if (curRow >= 0) emit(curRow, curCol, sum);
}
