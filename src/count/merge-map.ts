/**
 * The count stage's merge task, run in a worker thread or the main thread alike: the rows of one output part
 * from its runs (one per count task of each chunk), summed row by row and written as that part's counts
 * shard, with the part's marginals. Parts are independent, so the merge runs on all threads and its output
 * does not depend on which thread merged which part.
 */
import { ShardWriter } from '../store/shards.js';
import { RunReader, SortedRowSource, mergeRowWise, readRunBatches } from './runs.js';

export interface MergeSetup {
  nCols: number;
  /** Stored sums are the counts times this (exact integer harmonic weights); written divided by it. */
  scale: number;
  bufferRecords: number;
  /** Each row is in one run only (the corpus was counted in one chunk): the runs are copied, not summed. */
  disjoint: boolean;
}

export interface MergeTask {
  file: string;
  firstRow: number;
  endRow: number;
  /** The part's runs. */
  runs: string[];
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
    const { nCols, scale, bufferRecords, disjoint } = this.setup;
    const { firstRow, endRow } = task;
    const rowSums = new Float64Array(endRow - firstRow);
    const rowNnz = new Uint32Array(endRow - firstRow);
    const colSums = new Float64Array(nCols);
    let total = 0;
    const writer = new ShardWriter(task.file, 'float64');
    if (disjoint) {
      // the runs hold the part's rows in order, each row whole: entries go to the shard as they are
      for (const f of task.runs) {
        readRunBatches(f, bufferRecords, (u32, f64, n) => {
          for (let i = 0; i < n; i++) {
            const r = u32[4 * i];
            const c = u32[4 * i + 1];
            const v = f64[2 * i + 1];
            rowSums[r - firstRow] += v;
            rowNnz[r - firstRow]++;
            colSums[c] += v;
            writer.append(r, c, v / scale);
          }
        });
      }
      for (let i = 0; i < rowSums.length; i++) total += rowSums[i];
    } else {
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
    await writer.close();
    onProgress(1);
    return { entries: writer.entries, rowSums, rowNnz, colSums, total };
  }

  finish(): Record<string, never> {
    return {};
  }
}
