/**
 * The count task, run in a worker thread or the main thread alike: the rows [firstRow, endRow) of one loaded
 * chunk, each counted from its term's occurrences (the chunk's index) into a dense scratch row, written as a
 * sorted run of (row, col, scaled sum) records. Every cell is summed in corpus order, whatever the thread,
 * so the runs do not depend on the thread count. The scratch row stays in cache for the columns of frequent
 * terms (ids are in descending count order), which is where most of a row's events fall.
 */
import type { ContextsConfig } from '../config/types.js';
import { documentEndIn, type Chunk } from './chunks.js';
import { RunWriter } from './runs.js';

export interface RowsSetup {
  chunk: Chunk;
  contexts: ContextsConfig;
  /** Integer weight per distance 1..window (windowWeights), for window contexts. */
  weights: Float64Array;
  nCols: number;
}

export interface RowsTask {
  firstRow: number;
  endRow: number;
  /** The run file to write. */
  file: string;
  /** Progress units to report when done. */
  progress: number;
}

export interface RowsResult {
  /** Records written. */
  entries: number;
  /** Pair events counted (context tokens added to rows). */
  pairs: number;
  /** Per row of the task: the sum of its cells (scaled, summed in column order) and its nonzero cells, in this chunk. */
  rowSums: Float64Array;
  rowNnz: Uint32Array;
}

/** A mapper's column sums (scaled) over all the rows it counted. */
export interface RowsPartial {
  colSums: Float64Array;
}

/** A task's run file and the sums of its rows; every mapper's column sums. */
class RowOutput {
  private readonly run: RunWriter;
  readonly rowSums: Float64Array;
  readonly rowNnz: Uint32Array;

  constructor(private readonly task: RowsTask, private readonly colSums: Float64Array) {
    this.run = new RunWriter(task.file);
    this.rowSums = new Float64Array(task.endRow - task.firstRow);
    this.rowNnz = new Uint32Array(task.endRow - task.firstRow);
  }

  get records(): number {
    return this.run.records;
  }

  /** Row r's cells: columns cols (ascending), values sums[col]. */
  appendRow(r: number, cols: Uint32Array, sums: Float64Array): void {
    const { colSums } = this;
    let rowSum = 0;
    for (let i = 0; i < cols.length; i++) {
      const c = cols[i];
      rowSum += sums[c];
      colSums[c] += sums[c];
    }
    this.rowSums[r - this.task.firstRow] = rowSum;
    this.rowNnz[r - this.task.firstRow] = cols.length;
    this.run.appendRow(r, cols, sums);
  }

  /** One cell of row r, rows and columns in ascending order. */
  append(r: number, c: number, value: number): void {
    this.rowSums[r - this.task.firstRow] += value;
    this.rowNnz[r - this.task.firstRow]++;
    this.colSums[c] += value;
    this.run.append(r, c, value);
  }

  close(): void {
    this.run.close();
  }
}

/**
 * Sums by column of the row being counted, and the columns it touched: kept by the thread from chunk to chunk
 * (all zero between rows), as fresh memory is slow to touch.
 */
let scratch: { sums: Float64Array; touched: Uint32Array } | null = null;

function scratchFor(nCols: number): { sums: Float64Array; touched: Uint32Array } {
  if (scratch === null || scratch.sums.length !== nCols) scratch = { sums: new Float64Array(nCols), touched: new Uint32Array(nCols) };
  return scratch;
}

/** Rows of a chunk as sorted runs, with their sums. */
export class RowsMapper {
  private readonly colSums: Float64Array;

  constructor(private readonly setup: RowsSetup) {
    this.colSums = new Float64Array(setup.nCols);
  }

  async run(task: RowsTask, onProgress: (units: number) => void): Promise<RowsResult> {
    const out = new RowOutput(task, this.colSums);
    let pairs = 0;
    try {
      pairs = this.setup.contexts.type === 'document' ? this.documentRows(task, out) : this.windowRows(task, out);
    } catch (e) {
      scratch = null; // it may hold a row half counted
      throw e;
    } finally {
      out.close();
    }
    onProgress(task.progress);
    return { entries: out.records, pairs, rowSums: out.rowSums, rowNnz: out.rowNnz };
  }

  private windowRows(task: RowsTask, out: RowOutput): number {
    const { chunk, contexts, weights, nCols } = this.setup;
    const { ids, positions, rowStart } = chunk;
    // an entry is a term id exactly when (id >>> 0) < nRows, for int32 and uint16 ids alike (chunks.ts)
    const nRows = rowStart.length - 1;
    const documentEnd = documentEndIn(ids);
    const k = contexts.window;
    const left = contexts.direction !== 'right' ? k : 0;
    const right = contexts.direction !== 'left' ? k : 0;
    const { sums, touched } = scratchFor(nCols);
    let pairs = 0;
    for (let r = task.firstRow; r < task.endRow; r++) {
      let n = 0;
      const end = rowStart[r + 1];
      for (let q = rowStart[r]; q < end; q++) {
        const p = positions[q];
        for (let d = 1; d <= left; d++) {
          const c = ids[p - d];
          if (c >>> 0 >= nRows) {
            if (c === documentEnd) break;
            continue;
          }
          if (sums[c] === 0) touched[n++] = c;
          sums[c] += weights[d];
          pairs++;
        }
        for (let d = 1; d <= right; d++) {
          const c = ids[p + d];
          if (c >>> 0 >= nRows) {
            if (c === documentEnd) break;
            continue;
          }
          if (sums[c] === 0) touched[n++] = c;
          sums[c] += weights[d];
          pairs++;
        }
      }
      if (n === 0) continue;
      const cols = touched.subarray(0, n);
      cols.sort();
      out.appendRow(r, cols, sums);
      for (let i = 0; i < n; i++) sums[cols[i]] = 0;
    }
    return pairs;
  }

  /** Term × document counts: a row's occurrences are in corpus order, so its documents come out ascending. */
  private documentRows(task: RowsTask, out: RowOutput): number {
    const { chunk } = this.setup;
    const { positions, rowStart, documentEnds, firstDocument } = chunk;
    const nEnds = documentEnds.length;
    let pairs = 0;
    for (let r = task.firstRow; r < task.endRow; r++) {
      let e = 0;
      let doc = -1;
      let count = 0;
      const end = rowStart[r + 1];
      for (let q = rowStart[r]; q < end; q++) {
        const p = positions[q];
        // the document of p: how many documents end before it (a search from the last one found)
        let lo = e;
        let hi = nEnds;
        while (lo < hi) {
          const mid = (lo + hi) >>> 1;
          if (documentEnds[mid] < p) lo = mid + 1;
          else hi = mid;
        }
        e = lo;
        if (e !== doc) {
          if (count > 0) out.append(r, firstDocument + doc, count);
          doc = e;
          count = 0;
        }
        count++;
        pairs++;
      }
      if (count > 0) out.append(r, firstDocument + doc, count);
    }
    return pairs;
  }

  finish(): RowsPartial {
    return { colSums: this.colSums };
  }
}
