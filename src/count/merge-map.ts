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
    if (this.rows === 0 || r !== this.firstRow + this.rows - 1) {
      if (this.fill >= WEIGHT_BLOCK_ENTRIES) this.flush();
      if (this.rows === 0) this.firstRow = r;
      // rows with no entry in between stay empty
      while (this.firstRow + this.rows <= r) {
        if (this.rows + 1 >= this.indptr.length) this.indptr = grow(this.indptr, new Uint32Array(this.indptr.length * 2));
        this.indptr[++this.rows] = this.fill;
      }
    }
    if (this.fill === this.cols.length) {
      this.cols = grow(this.cols, new Uint32Array(this.cols.length * 2));
      this.values = grow(this.values, new Float64Array(this.values.length * 2));
    }
    this.cols[this.fill] = c;
    this.values[this.fill++] = count;
    this.indptr[this.rows] = this.fill;
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
 * The state of a part's mirrored merge between batches: the Rᵀ entries of rows [a, b) (row w's at cols / vals
 * [starts[w - a], starts[w - a + 1])), the row being merged (w) and its next Rᵀ entry (q, up to qEnd); the
 * merged records (o32 / o64, k of them) handed to `put` when full; `load` holds the rows from a given row on.
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
  o32: Uint32Array;
  o64: Float64Array;
  k: number;
  put: (u32: Uint32Array, f64: Float64Array, n: number) => void;
  load: (from: number) => void;
}

/** Writes merged record k (row r, column c, value v), handing the records to `put` when full; returns the next k. */
function record(st: MirrorState, k: number, r: number, c: number, v: number): number {
  const { o32, o64 } = st;
  o32[4 * k] = r;
  o32[4 * k + 1] = c;
  o64[2 * k + 1] = v;
  if (4 * (k + 1) < o32.length) return k + 1;
  st.put(o32, o64, k + 1);
  return 0;
}

/**
 * Merges a batch of R's records (rows ascending, columns ascending within a row) with the Rᵀ entries of their
 * rows, summing a cell in both; rows of Rᵀ with no record of R in between are written whole. A batch of no
 * records ends the merge: the rows left to endRow are written.
 */
function mergeMirrorBatch(u32: Uint32Array, f64: Float64Array, n: number, st: MirrorState): void {
  let { cols, vals, w, q, qEnd, k } = st;
  // a batch of no records stands for the end: the rows left
  const last = n === 0 ? 0 : n - 1;
  for (let i = 0; i <= last; i++) {
    const r = n === 0 ? st.endRow : u32[4 * i];
    const c = n === 0 ? 0 : u32[4 * i + 1];
    while (w < r) {
      // the rest of row w, then the next row
      for (; q < qEnd; q++) k = record(st, k, w, cols[q], vals[q]);
      if (++w === st.endRow) break;
      if (w === st.b) {
        st.load(w);
        ({ cols, vals, q, qEnd } = st);
      } else {
        q = st.starts[w - st.a];
        qEnd = st.starts[w - st.a + 1];
      }
    }
    if (n === 0) break;
    let v = f64[2 * i + 1];
    for (; q < qEnd && cols[q] <= c; q++) {
      if (cols[q] === c) v += vals[q];
      else k = record(st, k, r, cols[q], vals[q]);
    }
    k = record(st, k, r, c, v);
  }
  Object.assign(st, { w, q, qEnd, k });
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
      if (task.mirror !== null) this.mirrored(task, task.mirror, put);
      else for (const f of task.runs) readRunBatches(f, bufferRecords, put);
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
  private mirrored(task: MergeTask, mirror: MirrorInput, put: (u32: Uint32Array, f64: Float64Array, n: number) => void): void {
    const { bufferRecords, mirrorEntries } = this.setup;
    const { firstRow, endRow } = task;
    if (firstRow === endRow) return;
    const out = takeBuffer(16 * bufferRecords);
    const st: MirrorState = {
      cols: new Uint32Array(0), vals: new Float64Array(0), starts: new Int32Array(1), a: firstRow, b: firstRow, w: firstRow, q: 0, qEnd: 0, endRow,
      o32: new Uint32Array(out.buffer, out.byteOffset, 4 * bufferRecords), o64: new Float64Array(out.buffer, out.byteOffset, 2 * bufferRecords), k: 0,
      put,
      load: (from: number): void => {
        // rows [from, b) whose Rᵀ entries fit the buffers (at least one row)
        let b = from;
        let total = 0;
        while (b < endRow && (b === from || total + mirror.nnz[b - firstRow] <= mirrorEntries)) total += mirror.nnz[b++ - firstRow];
        const starts = new Int32Array(b - from + 1);
        for (let w = from; w < b; w++) starts[w - from + 1] = starts[w - from] + mirror.nnz[w - firstRow];
        const { cols, vals } = this.mirrorArrays(total);
        placeMirror(mirror.segments, bufferRecords, from, b, starts, cols, vals);
        Object.assign(st, { cols, vals, starts, a: from, b, q: starts[0], qEnd: starts[1] });
      },
    };
    try {
      st.load(firstRow);
      for (const f of task.runs) readRunBatches(f, bufferRecords, (u32, f64, n) => mergeMirrorBatch(u32, f64, n, st));
      mergeMirrorBatch(new Uint32Array(0), new Float64Array(0), 0, st);
      put(st.o32, st.o64, st.k);
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
