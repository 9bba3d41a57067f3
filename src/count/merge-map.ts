/**
 * The count stage's merge task, run in a worker thread or the main thread alike: the rows of one output part
 * from its runs (one per count task of each chunk), summed row by row and written as that part's counts
 * shard, with the part's marginals. Parts are independent, so the merge runs on all threads and its output
 * does not depend on which thread merged which part.
 */
import type { Normalization, WeightingConfig } from '../config/types.js';
import { ShardWriter, Syncing, type ShardValueType } from '../store/shards.js';
import type { FileChecksum } from '../store/arrow-sink.js';
import { weightAndNormalizeInPlace } from '../weight/index.js';
import type { Marginals } from '../weight/types.js';
import { RunReader, SortedRowSource, mergeRowWise, readRunBatches } from './runs.js';

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
}

export interface WeighSetup {
  weighting: WeightingConfig;
  normalize: Normalization;
  valueType: ShardValueType;
  marginals: Marginals;
}

export interface MergeTask {
  file: string;
  firstRow: number;
  endRow: number;
  /** The part's runs. */
  runs: string[];
  /** Where the weighted shard goes, when the setup weighs. */
  weightedFile: string | null;
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

function grow<T extends Uint32Array | Float64Array>(from: T, to: T): T {
  to.set(from);
  return to;
}

export class MergeMapper {
  /** The written shards' syncs to disk, waited for at the end (a part's syncs overlap the next part's work). */
  private readonly syncing = new Syncing();

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
            weighted?.add(r, c, v / scale);
          }
        });
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

  /** Once every shard it wrote is on disk. */
  async finish(): Promise<Record<string, never>> {
    await this.syncing.done();
    return {};
  }
}
