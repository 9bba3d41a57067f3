import { openSync, readSync, closeSync, fstatSync } from 'node:fs';
import { wrapWriteError, writeBytesOrThrow } from '../store/atomic.js';
import { giveBuffer, takeBuffer } from '../store/buffer-pool.js';

/** A run (the rows of one count task, or a part of them): sorted (row u32, col u32, value f64) records, 16 bytes each, little-endian. */
const RECORD = 16;
const BUFFER_RECORDS = 1 << 16;

/**
 * Writes n records of row `row` at record `at` of a buffer: columns cols[from ..], values sums[col]. A function of
 * its own, so that the code around this loop, compiled while the loop runs, is not compiled before it ran.
 */
function writeRecords(u32: Uint32Array, f64: Float64Array, at: number, row: number, cols: Uint32Array, from: number, n: number, sums: Float64Array): void {
  for (let k = 0; k < n; k++) {
    const c = cols[from + k];
    const i = at + k;
    u32[4 * i] = row;
    u32[4 * i + 1] = c;
    f64[2 * i + 1] = sums[c];
  }
}

export class RunWriter {
  private readonly fd: number;
  private readonly buf = takeBuffer(RECORD * BUFFER_RECORDS);
  private readonly u32 = new Uint32Array(this.buf.buffer, this.buf.byteOffset, (RECORD / 4) * BUFFER_RECORDS);
  private readonly f64 = new Float64Array(this.buf.buffer, this.buf.byteOffset, (RECORD / 8) * BUFFER_RECORDS);
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
    const i = this.fill;
    this.u32[4 * i] = row;
    this.u32[4 * i + 1] = col;
    this.f64[2 * i + 1] = value;
    this.records++;
    if (++this.fill === BUFFER_RECORDS) this.flush();
  }

  /** Appends row's entries: columns cols (ascending), values sums[col]. */
  appendRow(row: number, cols: Uint32Array, sums: Float64Array): void {
    for (let from = 0; from < cols.length;) {
      const n = Math.min(cols.length - from, BUFFER_RECORDS - this.fill);
      writeRecords(this.u32, this.f64, this.fill, row, cols, from, n, sums);
      this.fill += n;
      from += n;
      if (this.fill === BUFFER_RECORDS) this.flush();
    }
    this.records += cols.length;
  }

  private flush(): void {
    writeBytesOrThrow(this.fd, this.buf, this.fill * RECORD, this.file);
    this.fill = 0;
  }

  close(): void {
    try {
      this.flush();
    } finally {
      closeSync(this.fd);
      giveBuffer(this.buf);
    }
  }
}

/** A piece of a mirror file: `count` records from record `start`, all of one part. */
export interface MirrorSegment {
  part: number;
  start: number;
  count: number;
}

/**
 * Copies cells i, i + 1 … of a row to their parts' buffers (MirrorWriter.appendRow) until the end of the row or
 * until a part's buffer is full; returns the index after the last cell copied.
 */
function fillParts(
  u32: Uint32Array, f64: Float64Array, fill: Int32Array, perPart: number, partOf: Int32Array,
  r: number, cols: Uint32Array, sums: Float64Array, i: number,
): number {
  for (; i < cols.length; i++) {
    const c = cols[i];
    const p = partOf[c];
    const at = p * perPart + fill[p];
    u32[4 * at] = c;
    u32[4 * at + 1] = r;
    f64[2 * at + 1] = sums[c];
    if (++fill[p] === perPart) return i + 1;
  }
  return i;
}

/**
 * One thread's mirror file (mirrored counting, passes.ts): records (row, col, value) bound for the parts that
 * hold their rows, kept in a small buffer per part and appended to the one file in segments of one part each.
 * `endTask` writes out every buffer and returns the segments written since the last call, in write order.
 */
export class MirrorWriter {
  private readonly fd: number;
  private readonly buf: Buffer;
  private readonly u32: Uint32Array;
  private readonly f64: Float64Array;
  /** Records in each part's buffer (part p's buffer starts at record p * perPart). */
  private readonly fill: Int32Array;
  private written = 0;
  private segments: MirrorSegment[] = [];
  private closed = false;

  constructor(readonly file: string, parts: number, private readonly perPart: number) {
    this.buf = takeBuffer(RECORD * parts * perPart);
    this.u32 = new Uint32Array(this.buf.buffer, this.buf.byteOffset, (RECORD / 4) * parts * perPart);
    this.f64 = new Float64Array(this.buf.buffer, this.buf.byteOffset, (RECORD / 8) * parts * perPart);
    this.fill = new Int32Array(parts);
    try {
      this.fd = openSync(file, 'w');
    } catch (e) {
      giveBuffer(this.buf);
      throw wrapWriteError(e, file);
    }
  }

  /**
   * Appends row r's cells (columns cols, values sums[col]) as (col, r, value), each bound for the part of its
   * column (partOf). The copying loop stops when a part's buffer is full; it is written out here, between calls,
   * so that the loop never meets the write.
   */
  appendRow(r: number, cols: Uint32Array, sums: Float64Array, partOf: Int32Array): void {
    for (let i = 0; i < cols.length;) {
      i = fillParts(this.u32, this.f64, this.fill, this.perPart, partOf, r, cols, sums, i);
      const last = partOf[cols[i - 1]];
      if (this.fill[last] === this.perPart) this.flush(last);
    }
  }

  private flush(part: number): void {
    const n = this.fill[part];
    if (n === 0) return;
    const from = RECORD * part * this.perPart;
    writeBytesOrThrow(this.fd, this.buf.subarray(from, from + RECORD * n), RECORD * n, this.file);
    this.segments.push({ part, start: this.written, count: n });
    this.written += n;
    this.fill[part] = 0;
  }

  endTask(): MirrorSegment[] {
    for (let p = 0; p < this.fill.length; p++) this.flush(p);
    const out = this.segments;
    this.segments = [];
    return out;
  }

  /** Closes the file (once; later calls do nothing). */
  close(): void {
    if (this.closed) return;
    this.closed = true;
    closeSync(this.fd);
    giveBuffer(this.buf);
  }
}

/**
 * Reads `count` records from record `start` of an open run file through a buffer of bufferRecords, in batches
 * as readRunBatches does.
 */
export function readRunRange(
  fd: number, file: string, start: number, count: number, bufferRecords: number, onBatch: (u32: Uint32Array, f64: Float64Array, n: number) => void,
): void {
  // always the same size, so that the thread's pool gives the same buffer back every time
  const records = Math.max(1, bufferRecords);
  const buf = takeBuffer(RECORD * records);
  const u32 = new Uint32Array(buf.buffer, buf.byteOffset, (RECORD / 4) * records);
  const f64 = new Float64Array(buf.buffer, buf.byteOffset, (RECORD / 8) * records);
  try {
    for (let done = 0; done < count;) {
      const n = Math.min(records, count - done);
      const bytes = readSync(fd, buf, 0, RECORD * n, RECORD * (start + done));
      if (bytes !== RECORD * n) throw new Error(`${file}: ${bytes} bytes read at record ${start + done}, ${RECORD * n} expected (cut short)`);
      onBatch(u32, f64, n);
      done += n;
    }
  } finally {
    giveBuffer(buf);
  }
}

/** A stream of (row, col, value) entries in ascending (row, col) order. */
export interface SortedSource {
  row: number;
  col: number;
  value: number;
  done: boolean;
  /** Moves to the next entry; sets done at the end. */
  advance(): void;
}

/** Reads a run record by record through a fixed buffer. */
export class RunReader implements SortedSource {
  private readonly fd: number;
  private readonly buf: Buffer;
  private have = 0;
  private at = 0;
  row = 0;
  col = 0;
  value = 0;
  done = false;

  /** Next file offset to read from. */
  private position = 0;

  private readonly u32: Uint32Array;
  private readonly f64: Float64Array;

  constructor(readonly file: string, bufferRecords = BUFFER_RECORDS) {
    const records = Math.max(1, bufferRecords);
    this.buf = takeBuffer(RECORD * records);
    this.u32 = new Uint32Array(this.buf.buffer, this.buf.byteOffset, (RECORD / 4) * records);
    this.f64 = new Float64Array(this.buf.buffer, this.buf.byteOffset, (RECORD / 8) * records);
    this.fd = openSync(file, 'r');
    this.advance();
  }

  /** Stops reading and closes the file (also at the end of the run). */
  close(): void {
    if (this.done) return;
    this.done = true;
    closeSync(this.fd);
    giveBuffer(this.buf);
  }

  advance(): void {
    if (this.at === this.have) {
      const bytes = readSync(this.fd, this.buf, 0, this.buf.length, this.position);
      this.position += bytes;
      this.have = Math.floor(bytes / RECORD);
      this.at = 0;
      if (this.have === 0) {
        this.close();
        return;
      }
    }
    const i = this.at;
    this.row = this.u32[4 * i];
    this.col = this.u32[4 * i + 1];
    this.value = this.f64[2 * i + 1];
    this.at++;
  }
}

/**
 * Reads a run through a fixed buffer in batches: onBatch(u32, f64, n) gets records [0, n) as views (row
 * u32[4i], col u32[4i + 1], value f64[2i + 1]), valid during the call only.
 */
export function readRunBatches(file: string, bufferRecords: number, onBatch: (u32: Uint32Array, f64: Float64Array, n: number) => void): void {
  const fd = openSync(file, 'r');
  try {
    const bytes = fstatSync(fd).size;
    if (bytes % RECORD !== 0) throw new Error(`${file}: run cut inside a record (${bytes} bytes)`);
    readRunRange(fd, file, 0, bytes / RECORD, bufferRecords, onBatch);
  } finally {
    closeSync(fd);
  }
}

/**
 * k-way merge of sorted sources, summing equal (row, col) keys; emits in (row, col) order.
 * A binary heap over the sources keyed by row * nCols + col.
 */
export function mergeSources(sources: SortedSource[], nCols: number, emit: (row: number, col: number, value: number) => void): void {
  const heap = sources.filter((s) => !s.done);
  const keys = new Float64Array(heap.length);
  const keyOf = (s: SortedSource): number => s.row * nCols + s.col;
  for (let i = 0; i < heap.length; i++) keys[i] = keyOf(heap[i]);
  const down = (i: number): void => {
    const n = heap.length;
    for (;;) {
      const l = 2 * i + 1;
      const r = l + 1;
      let m = i;
      if (l < n && keys[l] < keys[m]) m = l;
      if (r < n && keys[r] < keys[m]) m = r;
      if (m === i) return;
      const s = heap[i];
      heap[i] = heap[m];
      heap[m] = s;
      const k = keys[i];
      keys[i] = keys[m];
      keys[m] = k;
      i = m;
    }
  };
  for (let i = (heap.length >> 1) - 1; i >= 0; i--) down(i);
  let curKey = -1;
  let curRow = 0;
  let curCol = 0;
  let sum = 0;
  while (heap.length > 0) {
    const top = heap[0];
    const key = keys[0];
    if (key === curKey) {
      sum += top.value;
    } else {
      if (curKey >= 0) emit(curRow, curCol, sum);
      curKey = key;
      curRow = top.row;
      curCol = top.col;
      sum = top.value;
    }
    top.advance();
    if (top.done) {
      const last = heap.pop()!;
      const lastKey = keys[heap.length];
      if (heap.length > 0 && last !== top) {
        heap[0] = last;
        keys[0] = lastKey;
      }
    } else {
      keys[0] = keyOf(top);
    }
    if (heap.length > 0) down(0);
  }
  if (curKey >= 0) emit(curRow, curCol, sum);
}

/** Sums one row's entries of a source into a row accumulator. */
export interface RowWiseSource {
  /** Adds the entries of row r (rows are asked for in ascending order, each once). */
  addRow(r: number, acc: RowAccumulator): void;
}

/**
 * One row's sums over all columns: a dense scratch array of column sums and the list of columns touched.
 * Entries are positive (counts), so a zero sum means an untouched column.
 */
export class RowAccumulator {
  readonly sums: Float64Array;
  cols: Uint32Array;
  n = 0;

  constructor(nCols: number) {
    this.sums = new Float64Array(nCols);
    this.cols = new Uint32Array(1024);
  }

  add(col: number, value: number): void {
    if (this.sums[col] === 0) {
      if (this.n === this.cols.length) {
        const bigger = new Uint32Array(this.cols.length * 2);
        bigger.set(this.cols);
        this.cols = bigger;
      }
      this.cols[this.n++] = col;
    }
    this.sums[col] += value;
  }
}

/** A sorted source (a run) as a row-wise source. */
export class SortedRowSource implements RowWiseSource {
  constructor(private readonly source: SortedSource & { close?(): void }) {}

  /** Releases the source (a run read only in part stays open otherwise). */
  close(): void {
    this.source.close?.();
  }

  addRow(r: number, acc: RowAccumulator): void {
    const s = this.source;
    while (!s.done && s.row === r) {
      acc.add(s.col, s.value);
      s.advance();
    }
  }
}

/** Widest matrix merged row by row (a dense scratch row of 8 bytes a column); wider ones use mergeSources. */
export const MAX_ROW_WISE_COLUMNS = 1 << 24;

/**
 * Merges rows [firstRow, endRow) of row-wise sources row by row, summing equal (row, col) entries: each row's entries are summed in a dense
 * scratch row, its columns sorted, and handed to emitRow(row, cols, sums, n), where sums is indexed by column
 * (valid during the call only). Faster than a heap over entries when rows are many entries long.
 */
export function mergeRowWise(
  sources: RowWiseSource[], firstRow: number, endRow: number, nCols: number,
  emitRow: (row: number, cols: Uint32Array, sums: Float64Array, n: number) => void,
): void {
  const acc = new RowAccumulator(nCols);
  for (let r = firstRow; r < endRow; r++) {
    for (const s of sources) s.addRow(r, acc);
    const n = acc.n;
    if (n === 0) continue;
    const cols = acc.cols.subarray(0, n);
    cols.sort();
    emitRow(r, cols, acc.sums, n);
    for (let i = 0; i < n; i++) acc.sums[cols[i]] = 0;
    acc.n = 0;
  }
}
