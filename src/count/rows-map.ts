/**
 * The count task, run in a worker thread or the main thread alike: the rows [firstRow, endRow) of one group of
 * a loaded chunk, whose occurrences were gathered by row in corpus order (gather.ts). Each row is counted from
 * its occurrences into a dense scratch row and written as a sorted run of (row, col, scaled sum) records. Every
 * cell is summed in corpus order, whatever the thread and the groups, so the runs depend on neither. The
 * scratch row stays in cache for the columns of frequent terms (ids are in descending count order), which is
 * where most of a row's events fall. A lone row with more occurrences than the buffer holds is gathered here,
 * in pieces, and counted piece by piece. Counted mirrored (passes.ts), each cell is also written turned around
 * to the thread's mirror file, for the merge to add R's transpose.
 */
import type { ContextsConfig } from '../config/types.js';
import { documentEndIn, type Chunk, type ChunkIds } from './chunks.js';
import { gatherRow, gatherWidth, type RowGroup } from './gather.js';
import { MirrorWriter, RunWriter, type MirrorSegment } from './runs.js';

export interface RowsSetup {
  chunk: Chunk;
  contexts: ContextsConfig;
  /** Integer weight per distance 1..window (windowWeights), for window contexts. */
  weights: Float64Array;
  nCols: number;
  /** The shared gathering buffer: the group's occurrences (gathered unless the group is a lone row). */
  gathered: ChunkIds;
  group: RowGroup;
  /** Where the group's occurrences lie in the buffer (groupLayout); null for a lone row. */
  layout: Int32Array | null;
  /**
   * Mirrored counting (passes.ts): each cell (r, c, v) is written a second time, as (c, r, v), to this thread's
   * mirror file, in segments of the part that holds row c; partOf[c] is that part (shared). Null: not mirrored.
   */
  mirror: { partOf: Int32Array; parts: number; file: string } | null;
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
  /** Mirrored counting: the thread's mirror file (setup.mirror.file; null when not mirrored) and the task's segments of it, in write order. */
  mirrorFile: string | null;
  mirror: MirrorSegment[];
}

/** A mapper's column sums (scaled) and nonzero cells per column over all the rows it counted. */
export interface RowsPartial {
  colSums: Float64Array;
  colNnz: Uint32Array;
}

/**
 * Adds a row's cells (columns cols, values sums[col]) to the column sums; returns the row's sum. A function of
 * its own, so that the code around this loop, compiled while the loop runs, is not compiled before it ran.
 */
function addToColumns(cols: Uint32Array, sums: Float64Array, colSums: Float64Array, colNnz: Uint32Array): number {
  let rowSum = 0;
  for (let i = 0; i < cols.length; i++) {
    const c = cols[i];
    rowSum += sums[c];
    colSums[c] += sums[c];
    colNnz[c]++;
  }
  return rowSum;
}

/** Records a thread holds per part before writing them to its mirror file. */
const MIRROR_BUFFER_RECORDS = 1 << 12;

/** A task's run file and the sums of its rows; every mapper's column sums (and mirror file). */
class RowOutput {
  private readonly run: RunWriter;
  readonly rowSums: Float64Array;
  readonly rowNnz: Uint32Array;

  constructor(
    private readonly task: RowsTask, private readonly colSums: Float64Array, private readonly colNnz: Uint32Array,
    private readonly partOf: Int32Array | null, private readonly mirror: MirrorWriter | null,
  ) {
    this.run = new RunWriter(task.file);
    this.rowSums = new Float64Array(task.endRow - task.firstRow);
    this.rowNnz = new Uint32Array(task.endRow - task.firstRow);
  }

  get records(): number {
    return this.run.records;
  }

  /** Row r's cells: columns cols (ascending), values sums[col]. */
  appendRow(r: number, cols: Uint32Array, sums: Float64Array): void {
    this.rowSums[r - this.task.firstRow] = addToColumns(cols, sums, this.colSums, this.colNnz);
    this.rowNnz[r - this.task.firstRow] = cols.length;
    this.run.appendRow(r, cols, sums);
    this.mirror?.appendRow(r, cols, sums, this.partOf!);
  }

  /** One cell of row r, rows and columns in ascending order. */
  append(r: number, c: number, value: number): void {
    this.rowSums[r - this.task.firstRow] += value;
    this.rowNnz[r - this.task.firstRow]++;
    this.colSums[c] += value;
    this.colNnz[c]++;
    this.run.append(r, c, value);
  }

  close(): void {
    this.run.close();
  }
}


/**
 * Sums by column of the row being counted, the columns it touched, and a bitmap of columns for ordering them:
 * kept by the thread from chunk to chunk (all zero between rows), as fresh memory is slow to touch.
 */
let scratch: { sums: Float64Array; touched: Uint32Array; bits: Int32Array } | null = null;

function scratchFor(nCols: number): { sums: Float64Array; touched: Uint32Array; bits: Int32Array } {
  if (scratch === null || scratch.sums.length !== nCols) {
    scratch = { sums: new Float64Array(nCols), touched: new Uint32Array(nCols), bits: new Int32Array((nCols + 31) >>> 5) };
  }
  return scratch;
}

/** Touched columns from which a row's are ordered through the bitmap rather than sorted (at least 1/32 of its words). */
const BITMAP_MIN_COLUMNS = 512;

/**
 * Puts the row's n distinct touched columns in ascending order. Sorting n columns costs n log n and more (a
 * typed-array sort of a few thousand is slow); a row that touched many marks them in a bitmap of all columns
 * and reads them back in order, word by word (`node scripts/bench/order-columns.mjs` compares the two).
 */
export function orderColumns(touched: Uint32Array, n: number, bits: Int32Array): Uint32Array {
  if (n < BITMAP_MIN_COLUMNS || 32 * n < bits.length) return touched.subarray(0, n).sort();
  return orderByBitmap(touched, n, bits);
}

/** orderColumns through the bitmap, whatever n (bits: all zero, and left so). */
export function orderByBitmap(touched: Uint32Array, n: number, bits: Int32Array): Uint32Array {
  for (let i = 0; i < n; i++) {
    const c = touched[i];
    bits[c >>> 5] |= 1 << (c & 31);
  }
  let k = 0;
  for (let w = 0; w < bits.length; w++) {
    let word = bits[w];
    if (word === 0) continue;
    bits[w] = 0;
    while (word !== 0) {
      const low = word & -word;
      touched[k++] = (w << 5) | (31 - Math.clz32(low));
      word ^= low;
    }
  }
  return touched.subarray(0, n);
}

/** Pair events added by the last call of addWindows. */
let added = 0;

/**
 * Adds the gathered windows [from, to) of buf to the scratch row (sums, and touched holding its first n touched
 * columns); returns the count of touched columns. A side of a window ends at a document end and skips
 * out-of-vocabulary tokens.
 */
function addWindows(
  buf: ChunkIds, from: number, to: number, left: number, right: number, weights: Float64Array, sums: Float64Array, touched: Uint32Array, n: number,
  nRows: number, documentEnd: number,
): number {
  const width = left + right;
  let events = 0;
  for (let q = from; q < to; q++) {
    const o = q * width;
    for (let d = 1; d <= left; d++) {
      const c = buf[o + d - 1];
      if (c >>> 0 >= nRows) {
        if (c === documentEnd) break;
        continue;
      }
      if (sums[c] === 0) touched[n++] = c;
      sums[c] += weights[d];
      events++;
    }
    for (let d = 1; d <= right; d++) {
      const c = buf[o + left + d - 1];
      if (c >>> 0 >= nRows) {
        if (c === documentEnd) break;
        continue;
      }
      if (sums[c] === 0) touched[n++] = c;
      sums[c] += weights[d];
      events++;
    }
  }
  added = events;
  return n;
}

/** Rows of a chunk as sorted runs, with their sums. */
export class RowsMapper {
  private readonly colSums: Float64Array;
  private readonly colNnz: Uint32Array;
  private readonly mirror: MirrorWriter | null;

  constructor(private readonly setup: RowsSetup) {
    this.colSums = new Float64Array(setup.nCols);
    this.colNnz = new Uint32Array(setup.nCols);
    this.mirror = setup.mirror === null ? null : new MirrorWriter(setup.mirror.file, setup.mirror.parts, MIRROR_BUFFER_RECORDS);
  }

  async run(task: RowsTask, onProgress: (units: number) => void): Promise<RowsResult> {
    const out = new RowOutput(task, this.colSums, this.colNnz, this.setup.mirror?.partOf ?? null, this.mirror);
    let mirror: MirrorSegment[] = [];
    let pairs = 0;
    try {
      pairs = this.setup.contexts.type === 'document' ? this.documentRows(task, out) : this.windowRows(task, out);
      if (this.mirror !== null) mirror = this.mirror.endTask();
    } catch (e) {
      scratch = null; // it may hold a row half counted
      this.mirror?.close(); // the mapper is done for
      throw e;
    } finally {
      out.close();
    }
    onProgress(task.progress);
    return { entries: out.records, pairs, rowSums: out.rowSums, rowNnz: out.rowNnz, mirrorFile: this.setup.mirror?.file ?? null, mirror };
  }

  /**
   * Calls `add(from, to)` with the gathered occurrences of row r, in corpus order: a range of the shared buffer
   * per slice, or, for a lone row, each piece gathered in turn.
   */
  private occurrencesOf(r: number, add: (from: number, to: number) => void): void {
    const { chunk, contexts, gathered, group, layout } = this.setup;
    if (layout !== null) {
      const span = group.end - group.first;
      for (let at = r - group.first; at < layout.length; at += span + 1) add(layout[at], layout[at + 1]);
      return;
    }
    for (let at = chunk.ownStart, document = chunk.firstDocument; at < chunk.ownEnd;) {
      const piece = gatherRow(chunk, contexts, r, at, document, gathered);
      add(0, piece.gathered);
      at = piece.at;
      document = piece.document;
    }
  }

  private windowRows(task: RowsTask, out: RowOutput): number {
    const { chunk, contexts, weights, nCols, gathered } = this.setup;
    // an entry is a term id exactly when (id >>> 0) < nRows, for int32 and uint16 ids alike (chunks.ts)
    const nRows = chunk.rowStart.length - 1;
    const documentEnd = documentEndIn(chunk.ids);
    const { left, right } = gatherWidth(contexts);
    const { sums, touched, bits } = scratchFor(nCols);
    let pairs = 0;
    for (let r = task.firstRow; r < task.endRow; r++) {
      let n = 0;
      this.occurrencesOf(r, (from, to) => {
        n = addWindows(gathered, from, to, left, right, weights, sums, touched, n, nRows, documentEnd);
        pairs += added;
      });
      if (n === 0) continue;
      const cols = orderColumns(touched, n, bits);
      out.appendRow(r, cols, sums);
      for (let i = 0; i < n; i++) sums[cols[i]] = 0;
    }
    return pairs;
  }

  /** Term × document counts: a row's occurrences are gathered in corpus order, so its documents come out ascending. */
  private documentRows(task: RowsTask, out: RowOutput): number {
    const { chunk, gathered } = this.setup;
    for (let r = task.firstRow; r < task.endRow; r++) {
      let doc = -1;
      let count = 0;
      this.occurrencesOf(r, (from, to) => {
        for (let q = from; q < to; q++) {
          if (gathered[q] !== doc) {
            if (count > 0) out.append(r, doc, count);
            doc = gathered[q];
            count = 0;
          }
          count++;
        }
      });
      if (count > 0) out.append(r, doc, count);
    }
    return chunk.rowStart[task.endRow] - chunk.rowStart[task.firstRow];
  }

  finish(): RowsPartial {
    this.mirror?.close();
    return { colSums: this.colSums, colNnz: this.colNnz };
  }
}
