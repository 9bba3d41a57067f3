/**
 * The count stage's merge task, run in a worker thread or the main thread alike: the rows of one output part
 * from every source (the threads' in-memory rows, the summed dense blocks, every spilled run), summed row by
 * row and written as that part's counts shard, with the part's marginals. Parts are independent, so the
 * merge runs on all threads and its output does not depend on which thread merged which part.
 */
import { ShardWriter } from '../store/shards.js';
import {
  BandRowSource, DenseRowSource, RowsRowSource, RunReader, SortedRowSource, mergeRowWise, type RowWiseSource,
} from './runs.js';

export interface MergeSetup {
  nCols: number;
  /** Stored sums are the counts times this (exact integer harmonic weights); written divided by it. */
  scale: number;
  runs: string[];
  bufferRecords: number;
  /** The threads' dense blocks (summed cell by cell), or null. */
  dense: { blocks: Uint32Array[]; size: number; triangle: boolean } | null;
  /** The threads' dense bands (summed cell by cell), or null. */
  band: { blocks: Uint32Array[]; rows: number; denseSize: number } | null;
}

/** A thread's rows, all of them (shared memory): the task reads its part's rows. */
export interface RowsSlice {
  rowStart: Float64Array;
  cols: Uint32Array;
  values: Float64Array;
}

export interface MergeTask {
  file: string;
  firstRow: number;
  endRow: number;
  /** Each thread's in-memory rows. */
  rows: RowsSlice[];
}

/** A part's marginals, in stored (scaled) units. */
export interface MergeResult {
  entries: number;
  rowSums: Float64Array;
  rowNnz: Uint32Array;
  colSums: Float64Array;
  total: number;
}

export class MergeMapper {
  constructor(private readonly setup: MergeSetup) {}

  async run(task: MergeTask, onProgress: (parts: number) => void): Promise<MergeResult> {
    const { nCols, scale, runs, bufferRecords, dense, band } = this.setup;
    const { firstRow, endRow } = task;
    const sources: RowWiseSource[] = task.rows.map((s) => new RowsRowSource(s.rowStart, s.cols, s.values));
    if (dense !== null && firstRow < dense.size) sources.push(new DenseRowSource(dense.blocks, dense.size, dense.triangle));
    if (band !== null) sources.push(new BandRowSource(band.blocks, band.rows, band.denseSize, nCols));
    for (const f of runs) sources.push(new SortedRowSource(new RunReader(f, bufferRecords, firstRow)));
    const rowSums = new Float64Array(endRow - firstRow);
    const rowNnz = new Uint32Array(endRow - firstRow);
    const colSums = new Float64Array(nCols);
    let total = 0;
    const writer = new ShardWriter(task.file, 'float64');
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
    for (const s of sources) if (s instanceof SortedRowSource) s.close();
    await writer.close();
    onProgress(1);
    return { entries: writer.entries, rowSums, rowNnz, colSums, total };
  }

  finish(): Record<string, never> {
    return {};
  }
}
