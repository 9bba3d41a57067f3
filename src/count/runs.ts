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

  constructor(readonly file: string, bufferRecords = BUFFER_RECORDS) {
    this.buf = Buffer.allocUnsafe(RECORD * Math.max(1, bufferRecords));
    this.fd = openSync(file, 'r');
    this.advance();
  }

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
