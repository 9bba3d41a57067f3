import path from 'node:path';
import { rmSync } from 'node:fs';
import type { ContextsConfig } from '../config/types.js';
import type { Marginals } from '../weight/types.js';
import { PairTable } from './pair-table.js';
import { RunWriter, mergeRuns } from './runs.js';

/** Largest window for which harmonic weights are scaled to exact integers (lcm(1..16) = 720720). */
const EXACT_HARMONIC_MAX_WINDOW = 16;

function gcd(a: number, b: number): number {
  while (b) [a, b] = [b, a % b];
  return a;
}

/**
 * Integer weight per distance 1..k and the common scale: uniform weights are 1; harmonic weights 1/d are
 * stored as lcm(1..k)/d so that every sum is an exact integer, whatever the order of addition.
 */
export function windowWeights(contexts: ContextsConfig): { weights: Float64Array; scale: number } {
  const k = contexts.window;
  const weights = new Float64Array(k + 1);
  let scale = 1;
  if (contexts.weighting === 'harmonic') {
    if (k <= EXACT_HARMONIC_MAX_WINDOW) for (let d = 2; d <= k; d++) scale = (scale * d) / gcd(scale, d);
    for (let d = 1; d <= k; d++) weights[d] = k <= EXACT_HARMONIC_MAX_WINDOW ? scale / d : 1 / d;
  } else {
    for (let d = 1; d <= k; d++) weights[d] = 1;
  }
  return { weights, scale };
}

/** Slot count of the pair table that fits a memory budget, as a power of two. */
export function pairTableCapacity(memoryMiB: number): number {
  // a slot costs 16 bytes, and sorting a spill adds 12 bytes per entry at 70 % load
  const bytesPerSlot = PairTable.BYTES_PER_SLOT + 0.7 * 12;
  const slots = (memoryMiB * 1024 * 1024 * 0.6) / bytesPerSlot;
  return 2 ** Math.max(10, Math.floor(Math.log2(slots)));
}

export interface CountOptions {
  contexts: ContextsConfig;
  nRows: number;
  nCols: number;
  /** Pair-table slots before a sorted run is spilled to disk. */
  capacity: number;
  /** Folder for spilled runs; removed entries are the caller's to clean. */
  spillDir: string;
}

/**
 * Accumulates windowed or per-document co-occurrence weights in a bounded pair table, spilling sorted
 * runs to disk when it fills, and finally streams the merged (row, col, count) entries in order.
 */
export class CooccurrenceCounter {
  private readonly table: PairTable;
  private readonly weights: Float64Array;
  readonly scale: number;
  private readonly runs: string[] = [];
  pairs = 0;

  constructor(private readonly opts: CountOptions) {
    this.table = new PairTable(opts.capacity);
    const { weights, scale } = windowWeights(opts.contexts);
    this.weights = weights;
    this.scale = opts.contexts.type === 'document' ? 1 : scale;
  }

  get spilledRuns(): number {
    return this.runs.length;
  }

  /** Adds one document's token ids (-1 marks a token outside the vocabulary, which keeps its position). */
  addDocument(ids: Int32Array, length: number, docIndex: number): void {
    if (this.opts.contexts.type === 'document') {
      for (let i = 0; i < length; i++) if (ids[i] >= 0) this.add(ids[i], docIndex, 1);
      return;
    }
    const k = this.opts.contexts.window;
    const dir = this.opts.contexts.direction;
    const w = this.weights;
    for (let i = 0; i < length; i++) {
      const a = ids[i];
      if (a < 0) continue;
      const end = Math.min(length - 1, i + k);
      for (let j = i + 1; j <= end; j++) {
        const b = ids[j];
        if (b < 0) continue;
        const weight = w[j - i];
        // a precedes b: b is a's right context, a is b's left context
        if (dir !== 'left') this.add(a, b, weight);
        if (dir !== 'right') this.add(b, a, weight);
      }
    }
  }

  private add(row: number, col: number, weight: number): void {
    this.pairs++;
    this.table.add(row, col, weight);
    if (this.table.full) this.spill();
  }

  private spill(): void {
    const file = path.join(this.opts.spillDir, `run-${String(this.runs.length).padStart(5, '0')}.bin`);
    const writer = new RunWriter(file);
    this.table.drainSorted(this.opts.nCols, (r, c, v) => writer.append(r, c, v));
    writer.close();
    this.runs.push(file);
  }

  /**
   * Streams every (row, col, count) in (row, col) order, counts unscaled, and returns the marginals.
   * Spilled runs are merged and deleted.
   */
  finish(emit: (row: number, col: number, count: number) => void): Marginals {
    const { nRows, nCols } = this.opts;
    const rowSums = new Float64Array(nRows);
    const colSums = new Float64Array(nCols);
    const rowNnz = new Uint32Array(nRows);
    let total = 0;
    const scale = this.scale;
    const take = (r: number, c: number, scaled: number): void => {
      rowSums[r] += scaled;
      colSums[c] += scaled;
      rowNnz[r]++;
      total += scaled;
      emit(r, c, scaled / scale);
    };
    if (this.runs.length === 0) {
      this.table.drainSorted(nCols, take);
    } else {
      if (this.table.size > 0) this.spill();
      mergeRuns(this.runs, nCols, take);
      for (const f of this.runs) rmSync(f, { force: true });
    }
    for (let r = 0; r < nRows; r++) rowSums[r] /= scale;
    for (let c = 0; c < nCols; c++) colSums[c] /= scale;
    return { nRows, nCols, rowSums, colSums, total: total / scale, rowNnz };
  }
}
