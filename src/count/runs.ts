import { openSync, readSync, closeSync, fstatSync } from 'node:fs';
import { wrapWriteError, writeBytesOrThrow } from '../store/atomic.js';

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
    writeBytesOrThrow(this.fd, this.buf, this.fill * RECORD, this.file);
    this.fill = 0;
  }

  close(): void {
    this.flush();
    closeSync(this.fd);
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

  /** Reads the run from its first record of a row ≥ fromRow (found by binary search over the fixed-size records). */
  constructor(readonly file: string, bufferRecords = BUFFER_RECORDS, fromRow = 0) {
    this.buf = Buffer.allocUnsafe(RECORD * Math.max(1, bufferRecords));
    this.fd = openSync(file, 'r');
    if (fromRow > 0) this.position = RECORD * this.firstRecordOfRow(fromRow);
    this.advance();
  }

  /** Stops reading and closes the file (also at the end of the run). */
  close(): void {
    if (this.done) return;
    this.done = true;
    closeSync(this.fd);
  }

  private firstRecordOfRow(row: number): number {
    const one = Buffer.allocUnsafe(4);
    let lo = 0;
    let hi = Math.floor(fstatSync(this.fd).size / RECORD);
    while (lo < hi) {
      const mid = (lo + hi) >>> 1;
      readSync(this.fd, one, 0, 4, mid * RECORD);
      if (one.readUInt32LE(0) < row) lo = mid + 1;
      else hi = mid;
    }
    return lo;
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
    const o = this.at * RECORD;
    this.row = this.buf.readUInt32LE(o);
    this.col = this.buf.readUInt32LE(o + 4);
    this.value = this.buf.readDoubleLE(o + 8);
    this.at++;
  }
}

/** Entries held as compressed sparse rows (rows ascending, columns ascending within a row), in memory. */
export class RowsSource implements SortedSource {
  private p = 0;
  private r = 0;
  row = 0;
  col = 0;
  value = 0;
  done = false;

  constructor(private readonly rowStart: Float64Array, private readonly cols: Uint32Array, private readonly values: Float64Array) {
    this.advance();
  }

  advance(): void {
    const p = this.p;
    if (p >= this.cols.length) {
      this.done = true;
      return;
    }
    while (this.rowStart[this.r + 1] <= p) this.r++;
    this.row = this.r;
    this.col = this.cols[p];
    this.value = this.values[p];
    this.p = p + 1;
  }
}

/**
 * The nonzero cells of a dense block of size D × D in (row, col) order. A triangle block holds each unordered
 * pair once at hi*(hi+1)/2 + lo; both orientations are emitted, and a diagonal cell counts twice (the pair was
 * seen from both of its ends).
 */
export class DenseSource implements SortedSource {
  private r = 0;
  private c = -1;
  row = 0;
  col = 0;
  value = 0;
  done = false;

  /** blocks: the dense blocks of several accumulators, summed cell by cell as they are read. */
  constructor(private readonly blocks: Uint32Array[], private readonly D: number, private readonly triangle: boolean) {
    this.advance();
  }

  private cell(i: number): number {
    let v = 0;
    for (const b of this.blocks) v += b[i];
    return v;
  }

  advance(): void {
    const { D, triangle } = this;
    for (;;) {
      if (++this.c >= D) {
        this.c = 0;
        if (++this.r >= D) {
          this.done = true;
          return;
        }
      }
      const r = this.r;
      const c = this.c;
      let v: number;
      if (!triangle) v = this.cell(r * D + c);
      else if (r === c) v = 2 * this.cell(((r * (r + 1)) >>> 1) + r);
      else v = r < c ? this.cell(((c * (c + 1)) >>> 1) + r) : this.cell(((r * (r + 1)) >>> 1) + c);
      if (v !== 0) {
        this.row = r;
        this.col = c;
        this.value = v;
        return;
      }
    }
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

/** k-way merge of sorted run files (see mergeSources). */
export function mergeRuns(files: string[], nCols: number, emit: (row: number, col: number, value: number) => void): void {
  mergeSources(files.map((f) => new RunReader(f)), nCols, emit);
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

/** Compressed sparse rows in memory as a row-wise source. */
export class RowsRowSource implements RowWiseSource {
  constructor(private readonly rowStart: Float64Array, private readonly cols: Uint32Array, private readonly values: Float64Array) {}

  addRow(r: number, acc: RowAccumulator): void {
    const { cols, values } = this;
    const end = this.rowStart[r + 1];
    for (let p = this.rowStart[r]; p < end; p++) acc.add(cols[p], values[p]);
  }
}

/** Dense blocks (summed cell by cell) as a row-wise source; triangles as in DenseSource. */
export class DenseRowSource implements RowWiseSource {
  constructor(private readonly blocks: Uint32Array[], private readonly D: number, private readonly triangle: boolean) {}

  addRow(r: number, acc: RowAccumulator): void {
    const { D, triangle, blocks } = this;
    if (r >= D) return;
    for (const b of blocks) {
      if (!triangle) {
        const base = r * D;
        for (let c = 0; c < D; c++) if (b[base + c] !== 0) acc.add(c, b[base + c]);
        continue;
      }
      // row r of the symmetric block: cells (r, c) for c ≤ r lie in row r of the triangle, for c > r in column r
      const base = (r * (r + 1)) >>> 1;
      for (let c = 0; c < r; c++) if (b[base + c] !== 0) acc.add(c, b[base + c]);
      if (b[base + r] !== 0) acc.add(r, 2 * b[base + r]); // a pair of one term with itself was seen from both ends
      for (let c = r + 1; c < D; c++) {
        const v = b[((c * (c + 1)) >>> 1) + r];
        if (v !== 0) acc.add(c, v);
      }
    }
  }
}

/**
 * Dense bands (summed cell by cell) as a row-wise source: band cell lo * nCols + hi holds the unordered pair
 * (lo, hi), lo < bandRows ≤ denseSize ≤ hi, so row r < bandRows has its columns ≥ denseSize there, and row
 * r ≥ denseSize its columns < bandRows.
 */
export class BandRowSource implements RowWiseSource {
  constructor(private readonly blocks: Uint32Array[], private readonly bandRows: number, private readonly denseSize: number, private readonly nCols: number) {}

  addRow(r: number, acc: RowAccumulator): void {
    const { blocks, bandRows, denseSize, nCols } = this;
    if (r < bandRows) {
      const base = r * nCols;
      for (const b of blocks) for (let c = denseSize; c < nCols; c++) if (b[base + c] !== 0) acc.add(c, b[base + c]);
    } else if (r >= denseSize) {
      for (const b of blocks) for (let c = 0; c < bandRows; c++) if (b[c * nCols + r] !== 0) acc.add(c, b[c * nCols + r]);
    }
  }
}

/** A sorted source (a spilled run) as a row-wise source. */
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
