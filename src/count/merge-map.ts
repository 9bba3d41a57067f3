/**
 * The count stage's merge task, run in a worker thread or the main thread alike: the rows of one output part
 * from its runs (one per count task of each chunk), summed row by row (or, counted mirrored, merged with the
 * part's rows of Rᵀ from the mirror files) and written as that part's counts shard, with the part's marginals. Parts are independent, so the merge runs on all threads and its output
 * does not depend on which thread merged which part.
 */
import { closeSync, openSync } from 'node:fs';
import type { Normalization, WeightingConfig } from '../config/types.js';
import { ShardWriter, Syncing, type ShardValueType } from '../store/shards.js';
import type { FileChecksum } from '../store/arrow-sink.js';
import { giveBuffer, takeBuffer } from '../store/buffer-pool.js';
import { weightAndNormalizeInPlace } from '../weight/index.js';
import type { Marginals } from '../weight/types.js';
import { RunReader, SortedRowSource, mergeRowWise, readRunBatches, readRunRange } from './runs.js';

export interface MergeSetup {
  nCols: number;
  /** Stored sums are the counts times this (exact integer harmonic weights); written divided by it. */
  scale: number;
  bufferRecords: number;
  /** Each row is in one run only (the corpus was counted in one chunk): the runs are copied, not summed. */
  disjoint: boolean;
  /**
   * With disjoint runs, the weighting too: each part's weighted shard is written as its counts are copied, with
   * the marginals the count tasks summed (the same numbers the merge sums). Null: counts only.
   */
  weigh: WeighSetup | null;
  /** Mirrored counting: the most mirror entries a thread holds at once (at least one row's are held). */
  mirrorEntries: number;
  /**
   * Mirrored counting: memory the count stage is done with (touched already, where fresh memory is slow), for
   * the threads' mirror entries: thread `slot` takes mirrorEntries columns (4 bytes each) of `cols` and values
   * (8 bytes each) of `vals` from slot * mirrorEntries on. Null: fresh arrays.
   */
  mirrorMemory: { cols: SharedArrayBuffer; vals: SharedArrayBuffer; slot: number } | null;
}

export interface WeighSetup {
  weighting: WeightingConfig;
  normalize: Normalization;
  valueType: ShardValueType;
  marginals: Marginals;
}

/** Mirrored counting: where a part's Rᵀ entries are (segments of the threads' mirror files) and how many each row has. */
export interface MirrorInput {
  segments: { file: string; start: number; count: number }[];
  nnz: Uint32Array;
}

export interface MergeTask {
  file: string;
  firstRow: number;
  endRow: number;
  /** The part's runs. */
  runs: string[];
  /** Where the weighted shard goes, when the setup weighs. */
  weightedFile: string | null;
  /**
   * Mirrored counting (the runs hold the right-hand windows R only; the part's rows are those of R + Rᵀ): the
   * segments of the mirror files bound for this part, in ascending row order of the tasks that wrote them, and
   * per row of the part the entries they hold for it (R's nonzeros in that column). Null: the runs are the counts.
   */
  mirror: MirrorInput | null;
}

/** A part's marginals, in stored (scaled) units. */
export interface MergeResult {
  entries: number;
  rowSums: Float64Array;
  rowNnz: Uint32Array;
  colSums: Float64Array;
  total: number;
  /** Entries of the weighted shard, when the setup weighs. */
  weightedEntries: number;
  /** Size and SHA-256 of the counts shard and of the weighted shard (null when the setup does not weigh). */
  countsChecksum: FileChecksum;
  weightedChecksum: FileChecksum | null;
}

/**
 * Entries of a block of complete rows handed to the weighting (the last row may make it longer); small, so that
 * the weighting's arrays are reused from the allocator's heap instead of mapped afresh for every block.
 */
const WEIGHT_BLOCK_ENTRIES = 1 << 13;

/** The end of the run of entries from i on (before n) that share entry i's row. */
function rowRunEnd(rows: Uint32Array, i: number, n: number): number {
  const r = rows[i];
  let end = i + 1;
  while (end < n && rows[end] === r) end++;
  return end;
}

/** Copies columns and values / divisor of entries [from, from + m) to `at`. */
function copyCounts(cols: Uint32Array, values: Float64Array, from: number, m: number, divisor: number, toCols: Uint32Array, toValues: Float64Array, at: number): void {
  for (let i = 0; i < m; i++) {
    toCols[at + i] = cols[from + i];
    toValues[at + i] = values[from + i] / divisor;
  }
}

/** Count rows, given in order, weighted and normalized in blocks of complete rows into a shard. */
class WeightedRows {
  private readonly writer: ShardWriter;
  private indptr = new Uint32Array(1024);
  private cols = new Uint32Array(2 * WEIGHT_BLOCK_ENTRIES);
  private values = new Float64Array(2 * WEIGHT_BLOCK_ENTRIES);
  private firstRow = -1;
  /** Rows of the block (the last one open) and entries. */
  private rows = 0;
  private fill = 0;

  constructor(file: string, private readonly setup: WeighSetup) {
    this.writer = new ShardWriter(file, setup.valueType);
  }

  get entries(): number {
    return this.writer.entries;
  }

  get checksum(): FileChecksum | null {
    return this.writer.checksum;
  }

  /** Adds count (row r, col c); rows ascending, columns ascending within a row. */
  add(r: number, c: number, count: number): void {
    if (this.rows === 0 || r !== this.firstRow + this.rows - 1) this.openRow(r);
    if (this.fill === this.cols.length) this.reserve(this.fill + 1);
    this.cols[this.fill] = c;
    this.values[this.fill++] = count;
    this.indptr[this.rows] = this.fill;
  }

  /**
   * Adds counts (rows[i], cols[i], values[i] / divisor) for i in [0, n), in the order of add(), a row's run of
   * entries at a time.
   */
  addColumns(rows: Uint32Array, cols: Uint32Array, values: Float64Array, n: number, divisor: number): void {
    for (let i = 0; i < n;) {
      const r = rows[i];
      const end = rowRunEnd(rows, i, n);
      if (this.rows === 0 || r !== this.firstRow + this.rows - 1) this.openRow(r);
      const m = end - i;
      if (this.fill + m > this.cols.length) this.reserve(this.fill + m);
      copyCounts(cols, values, i, m, divisor, this.cols, this.values, this.fill);
      this.fill += m;
      this.indptr[this.rows] = this.fill;
      i = end;
    }
  }

  /** Starts row r (after the block's last row), first handing the block to the weighting when it is big enough. */
  private openRow(r: number): void {
    if (this.fill >= WEIGHT_BLOCK_ENTRIES) this.flush();
    if (this.rows === 0) this.firstRow = r;
    // rows with no entry in between stay empty
    while (this.firstRow + this.rows <= r) {
      if (this.rows + 1 >= this.indptr.length) this.indptr = grow(this.indptr, new Uint32Array(this.indptr.length * 2));
      this.indptr[++this.rows] = this.fill;
    }
  }

  /** Room for n entries. */
  private reserve(n: number): void {
    let size = this.cols.length;
    while (size < n) size *= 2;
    this.cols = grow(this.cols, new Uint32Array(size));
    this.values = grow(this.values, new Float64Array(size));
  }

  private flush(): void {
    if (this.rows === 0) return;
    const block = {
      firstRow: this.firstRow,
      indptr: this.indptr.subarray(0, this.rows + 1),
      cols: this.cols.subarray(0, this.fill),
      values: this.values.subarray(0, this.fill),
    };
    const { weighting, normalize, marginals } = this.setup;
    // the block is this writer's own arrays, refilled next: weighted where it lies
    this.writer.appendBlock(weightAndNormalizeInPlace(block, marginals, weighting, normalize));
    this.rows = 0;
    this.fill = 0;
  }

  /** Writes the rest now; the promise settles once the shard is on disk (ShardWriter.end). */
  end(): Promise<void> {
    this.flush();
    return this.writer.end();
  }
}

/**
 * The state of a part's mirrored merge between steps: the Rᵀ entries of rows [a, b) (row w's at cols / vals
 * [starts[w - a], starts[w - a + 1])), the row being merged (w) and its next Rᵀ entry (q, up to qEnd), the next
 * record of R's batch (i); the merged cells (k of them) waiting in rows / outCols / outVals.
 */
interface MirrorState {
  cols: Uint32Array;
  vals: Float64Array;
  starts: Int32Array;
  a: number;
  b: number;
  w: number;
  q: number;
  qEnd: number;
  endRow: number;
  i: number;
  rows: Uint32Array;
  outCols: Uint32Array;
  outVals: Float64Array;
  k: number;
}

/** mergeStep's outcomes: the batch is merged (at the end: every row); the output is full; rows from w need loading. */
const STEP_DONE = 0;
const STEP_FULL = 1;
const STEP_LOAD = 2;
/** A batch of no records, for mergeStep's empty and final calls. */
const NO_RECORDS32 = new Uint32Array(0);
const NO_RECORDS64 = new Float64Array(0);

/**
 * Merges R's records from st.i of a batch (rows ascending, columns ascending within a row) with the Rᵀ entries
 * of their rows, summing a cell in both; rows of Rᵀ with no record of R in between are written whole. At the end
 * (`end`, no batch) the rows left to endRow are written. Stops when the output is full or the next row's Rᵀ
 * entries are not held, and says which: the caller hands the output on or loads, and calls again. The loop calls
 * nothing, so the rare paths are not compiled into it (V8 drops a loop's compiled code when it first meets one).
 */
function mergeStep(st: MirrorState, u32: Uint32Array, f64: Float64Array, n: number, end: boolean): number {
  const { cols, vals, starts, a, b, endRow, rows, outCols, outVals } = st;
  const cap = rows.length;
  let { w, q, qEnd, k, i } = st;
  let status = STEP_DONE;
  while (end || i < n) {
    const r = end ? endRow : u32[4 * i];
    // the rest of row w, then the rows before r whole
    while (w < r) {
      while (q < qEnd && k < cap) {
        rows[k] = w;
        outCols[k] = cols[q];
        outVals[k++] = vals[q++];
      }
      if (q < qEnd) {
        status = STEP_FULL;
        break;
      }
      if (++w === endRow) break;
      if (w === b) {
        status = STEP_LOAD;
        break;
      }
      q = starts[w - a];
      qEnd = starts[w - a + 1];
    }
    if (status !== STEP_DONE || end) break;
    const c = u32[4 * i + 1];
    while (q < qEnd && cols[q] < c && k < cap) {
      rows[k] = r;
      outCols[k] = cols[q];
      outVals[k++] = vals[q++];
    }
    if (k === cap) {
      status = STEP_FULL;
      break;
    }
    let v = f64[2 * i + 1];
    if (q < qEnd && cols[q] === c) v += vals[q++];
    rows[k] = r;
    outCols[k] = c;
    outVals[k++] = v;
    i++;
  }
  st.w = w;
  st.q = q;
  st.qEnd = qEnd;
  st.k = k;
  st.i = i;
  return status;
}

/**
 * Places the entries of rows [a, b) of Rᵀ held in the mirror segments (records (column of R, row of R, value),
 * that is (row, column, value) of Rᵀ) at their row's next place: rows start at starts[w - a] in cols / vals.
 */
function placeMirror(segments: MirrorInput['segments'], bufferRecords: number, a: number, b: number, starts: Int32Array, cols: Uint32Array, vals: Float64Array): void {
  const span = b - a;
  const next = starts.slice(0, span);
  const fds = new Map<string, number>();
  try {
    for (const { file, start, count } of segments) {
      let fd = fds.get(file);
      if (fd === undefined) {
        fd = openSync(file, 'r');
        fds.set(file, fd);
      }
      readRunRange(fd, file, start, count, bufferRecords, (u32, f64, n) => {
        for (let i = 0; i < n; i++) {
          const k = u32[4 * i] - a;
          if (k >>> 0 < span) {
            const at = next[k]++;
            cols[at] = u32[4 * i + 1];
            vals[at] = f64[2 * i + 1];
          }
        }
      });
    }
  } finally {
    for (const fd of fds.values()) closeSync(fd);
  }
  for (let k = 0; k < span; k++) {
    if (next[k] !== starts[k + 1]) throw new Error(`mirror runs hold ${next[k] - starts[k]} entries of row ${a + k}, the count tasks counted ${starts[k + 1] - starts[k]} (a bug)`);
  }
}

/** Adds cells (rows[i], cols[i], vals[i]), i in [0, n), to the part's row sums and nonzeros and its column sums. */
function addSums(rows: Uint32Array, cols: Uint32Array, vals: Float64Array, n: number, firstRow: number, rowSums: Float64Array, rowNnz: Uint32Array, colSums: Float64Array): void {
  for (let i = 0; i < n; i++) {
    const r = rows[i] - firstRow;
    const v = vals[i];
    rowSums[r] += v;
    rowNnz[r]++;
    colSums[cols[i]] += v;
  }
}

function grow<T extends Uint32Array | Float64Array>(from: T, to: T): T {
  to.set(from);
  return to;
}

export class MergeMapper {
  /** The written shards' syncs to disk, waited for at the end (a part's syncs overlap the next part's work). */
  private readonly syncing = new Syncing();
  /** Mirrored counting: this thread's share of the count stage's memory, for the Rᵀ entries of the rows being merged. */
  private arrays: { cols: Uint32Array; vals: Float64Array } | null = null;

  /** The thread's arrays for n mirror entries: its share of the count stage's memory when that holds them (it does when the setup plans so), else fresh. */
  private mirrorArrays(n: number): { cols: Uint32Array; vals: Float64Array } {
    const { mirrorMemory, mirrorEntries: entries } = this.setup;
    if (this.arrays === null && mirrorMemory !== null) {
      const { cols, vals, slot } = mirrorMemory;
      this.arrays = { cols: new Uint32Array(cols, 4 * slot * entries, entries), vals: new Float64Array(vals, 8 * slot * entries, entries) };
    }
    if (this.arrays === null || this.arrays.cols.length < n) this.arrays = { cols: new Uint32Array(n), vals: new Float64Array(n) };
    return this.arrays;
  }

  constructor(private readonly setup: MergeSetup) {}

  async run(task: MergeTask, onProgress: (parts: number) => void): Promise<MergeResult> {
    const { nCols, scale, bufferRecords, disjoint, weigh } = this.setup;
    const { firstRow, endRow } = task;
    const rowSums = new Float64Array(endRow - firstRow);
    const rowNnz = new Uint32Array(endRow - firstRow);
    const colSums = new Float64Array(nCols);
    let total = 0;
    const writer = new ShardWriter(task.file, 'float64');
    const weighted = weigh !== null && task.weightedFile !== null ? new WeightedRows(task.weightedFile, weigh) : null;
    if (disjoint) {
      // records in (row, col) order, each row whole: entries go to the shards as they are
      const put = (u32: Uint32Array, f64: Float64Array, n: number): void => {
        for (let i = 0; i < n; i++) {
          const r = u32[4 * i];
          const c = u32[4 * i + 1];
          const v = f64[2 * i + 1];
          rowSums[r - firstRow] += v;
          rowNnz[r - firstRow]++;
          colSums[c] += v;
          writer.append(r, c, v / scale);
          weighted?.add(r, c, v / scale);
        }
      };
      if (task.mirror !== null) {
        // merged cells come in columns, a buffer at a time
        this.mirrored(task, task.mirror, (rows, cols, vals, n) => {
          addSums(rows, cols, vals, n, firstRow, rowSums, rowNnz, colSums);
          writer.appendColumns(rows, cols, vals, n, scale);
          weighted?.addColumns(rows, cols, vals, n, scale);
        });
      } else {
        for (const f of task.runs) readRunBatches(f, bufferRecords, put);
      }
      for (let i = 0; i < rowSums.length; i++) total += rowSums[i];
    } else {
      if (weighted !== null) throw new Error('weighting while merging needs disjoint runs');
      const sources = task.runs.map((f) => new SortedRowSource(new RunReader(f, bufferRecords)));
      mergeRowWise(sources, firstRow, endRow, nCols, (r, cols, sums, n) => {
        let rowSum = 0;
        for (let i = 0; i < n; i++) {
          const c = cols[i];
          const v = sums[c];
          rowSum += v;
          colSums[c] += v;
        }
        rowSums[r - firstRow] = rowSum;
        rowNnz[r - firstRow] = n;
        total += rowSum;
        writer.appendRow(r, cols, sums, n, scale);
      });
      for (const s of sources) s.close();
    }
    this.syncing.add(writer.end());
    if (weighted !== null) this.syncing.add(weighted.end());
    onProgress(1);
    return {
      entries: writer.entries, rowSums, rowNnz, colSums, total,
      weightedEntries: weighted?.entries ?? 0, countsChecksum: writer.checksum!, weightedChecksum: weighted?.checksum ?? null,
    };
  }

  /**
   * The part's rows of R + Rᵀ, in (row, column) order, to `put`: R's rows stream from the part's runs, Rᵀ's
   * from the mirror runs, read for a range of rows at a time whose entries fit the thread's buffers and placed
   * by row (a counting sort: the mirror runs come in ascending row order of R, so each row of Rᵀ comes out in
   * ascending column order). A cell in both is one sum; the sums are of integers, so exact.
   */
  private mirrored(task: MergeTask, mirror: MirrorInput, consume: (rows: Uint32Array, cols: Uint32Array, vals: Float64Array, n: number) => void): void {
    const { bufferRecords, mirrorEntries } = this.setup;
    const { firstRow, endRow } = task;
    if (firstRow === endRow) return;
    const out = takeBuffer(16 * bufferRecords);
    const st: MirrorState = {
      cols: new Uint32Array(0), vals: new Float64Array(0), starts: new Int32Array(1), a: firstRow, b: firstRow, w: firstRow, q: 0, qEnd: 0, endRow, i: 0,
      outVals: new Float64Array(out.buffer, out.byteOffset, bufferRecords),
      rows: new Uint32Array(out.buffer, out.byteOffset + 8 * bufferRecords, bufferRecords),
      outCols: new Uint32Array(out.buffer, out.byteOffset + 12 * bufferRecords, bufferRecords),
      k: 0,
    };
    // rows [from, b) whose Rᵀ entries fit the buffers (at least one row)
    const load = (from: number): void => {
      let b = from;
      let total = 0;
      while (b < endRow && (b === from || total + mirror.nnz[b - firstRow] <= mirrorEntries)) total += mirror.nnz[b++ - firstRow];
      const starts = new Int32Array(b - from + 1);
      for (let w = from; w < b; w++) starts[w - from + 1] = starts[w - from] + mirror.nnz[w - firstRow];
      const { cols, vals } = this.mirrorArrays(total);
      placeMirror(mirror.segments, bufferRecords, from, b, starts, cols, vals);
      Object.assign(st, { cols, vals, starts, a: from, b, q: starts[0], qEnd: starts[1] });
    };
    const merge = (u32: Uint32Array, f64: Float64Array, n: number, end: boolean): void => {
      st.i = 0;
      for (;;) {
        const status = mergeStep(st, u32, f64, n, end);
        if (status === STEP_DONE) return;
        if (status === STEP_LOAD) {
          load(st.w);
        } else {
          consume(st.rows, st.outCols, st.outVals, st.k);
          st.k = 0;
        }
      }
    };
    try {
      load(firstRow);
      // calls that merge nothing, so that the code after mergeStep's loop has run with type feedback before V8
      // compiles the loop on-stack, while it runs: V8 records feedback only once a function has run some 4 KB of
      // bytecode, and code compiled on-stack with none there is reentered and dropped at every return (about 100
      // times a build on Brown x10 with 2 workers; 2 with these calls)
      for (let warm = 0; warm < 200; warm++) merge(NO_RECORDS32, NO_RECORDS64, 0, false);
      for (const f of task.runs) readRunBatches(f, bufferRecords, (u32, f64, n) => merge(u32, f64, n, false));
      merge(NO_RECORDS32, NO_RECORDS64, 0, true);
      consume(st.rows, st.outCols, st.outVals, st.k);
    } finally {
      giveBuffer(out);
    }
  }

  /** Once every shard it wrote is on disk. */
  async finish(): Promise<Record<string, never>> {
    await this.syncing.done();
    return {};
  }
}
