/**
 * Co-occurrence accumulation without per-pair objects: a dense block for the pairs of the most frequent
 * terms (ids are ranked by frequency, so "frequent" is simply id < denseSize) and an open-addressing hash of
 * packed keys for the rest. Symmetric windows store each unordered pair once (the matrix is symmetric), which
 * halves the work; both orientations are written out when entries leave the accumulator.
 *
 * Weights reaching here are integers (harmonic weights are scaled, see windowWeights), so every sum is exact and
 * independent of the order in which pairs arrive, runs spill or partial counts merge.
 */
import { RunWriter } from './runs.js';

const EMPTY_KEY = -1;
/** Dense cells are uint32: a sum reaching this moves to the hash. */
const DENSE_LIMIT = 2 ** 32;
/** Load factor at which the hash grows or, at its capacity limit, spills. */
const LOAD = 0.7;

export interface AccumulatorOptions {
  nRows: number;
  nCols: number;
  /** Rows and columns below this id go to the dense block (0 for none; weights must then be integers). */
  denseSize: number;
  /** Store unordered pairs once (symmetric windows). */
  triangle: boolean;
  /** Hash slots (a power of two) at which a sorted run is spilled. */
  capacity: number;
}

/** What an accumulator hands to the merge: its dense block, its remaining hash entries sorted, its spilled runs. */
export interface AccumulatorPartial {
  denseSize: number;
  triangle: boolean;
  /** Dense cells: triangle ? index hi*(hi+1)/2 + lo : row*denseSize + col. */
  dense: Uint32Array;
  runs: string[];
}

/** Entries sorted by (row, col) as compressed sparse rows: row r holds cols/values [rowStart[r], rowStart[r + 1]). */
export interface SortedRows {
  rowStart: Float64Array;
  cols: Uint32Array;
  values: Float64Array;
}

/** What an accumulator hands to the merge, with its remaining hash entries sorted. */
export type AccumulatorHandover = AccumulatorPartial & SortedRows;

/** Bytes of accumulator memory per hash slot, including the sorted copy (12 bytes per entry, both orientations). */
export const BYTES_PER_SLOT = 16 + LOAD * 2 * 12;

/** Bytes of a dense block of the given size. */
export function denseBytes(denseSize: number, triangle: boolean): number {
  return 4 * (triangle ? (denseSize * (denseSize + 1)) / 2 : denseSize * denseSize);
}

function hashPair(row: number, col: number): number {
  const h = (Math.imul(row, 0x9e3779b1) ^ Math.imul(col + 0x7f4a7c15, 0x85ebca77)) >>> 0;
  return h ^ (h >>> 15);
}

export class PairAccumulator {
  readonly dense: Uint32Array;
  private readonly D: number;
  private readonly nCols: number;
  private readonly nRows: number;
  private readonly triangle: boolean;
  private readonly maxCapacity: number;
  /** Interleaved slots: [2i] key (row * nCols + col, or -1), [2i + 1] summed weight. */
  private slots: Float64Array;
  private mask: number;
  private limit: number;
  size = 0;
  /** Pair events added, counted per orientation (a symmetric event counts twice). */
  pairs = 0;
  readonly runs: string[] = [];

  constructor(opts: AccumulatorOptions, private readonly spillFile: () => string) {
    this.D = opts.denseSize;
    this.nCols = opts.nCols;
    this.nRows = opts.nRows;
    this.triangle = opts.triangle;
    this.maxCapacity = opts.capacity;
    this.dense = new Uint32Array(denseBytes(this.D, this.triangle) / 4);
    const cap = Math.min(1 << 20, opts.capacity);
    this.slots = new Float64Array(2 * cap).fill(EMPTY_KEY);
    this.mask = cap - 1;
    this.limit = Math.floor(cap * LOAD);
  }

  /**
   * Adds the windowed co-occurrences of one document's token ids (-1 marks a token outside the vocabulary,
   * which keeps its position). weights[d] is the integer weight at distance d, 1 ≤ d ≤ k.
   */
  addWindowed(ids: Int32Array, length: number, k: number, weights: Float64Array, direction: 'symmetric' | 'left' | 'right'): void {
    const D = this.D;
    const dense = this.dense;
    let events = 0;
    if (direction === 'symmetric' && this.triangle) {
      // the hot loop of the build: the hash probe is written out here rather than called
      const nCols = this.nCols;
      let slots = this.slots;
      let mask = this.mask;
      for (let i = 0; i < length; i++) {
        const a = ids[i];
        if (a < 0) continue;
        const end = i + k < length ? i + k : length - 1;
        for (let j = i + 1; j <= end; j++) {
          const b = ids[j];
          if (b < 0) continue;
          events++;
          const lo = a < b ? a : b;
          const hi = a < b ? b : a;
          const w = weights[j - i];
          if (hi < D) {
            const cell = ((hi * (hi + 1)) >>> 1) + lo;
            const v = dense[cell] + w;
            if (v < DENSE_LIMIT) {
              dense[cell] = v;
              continue;
            }
            this.overflow(cell, v, lo, hi);
          } else {
            const key = lo * nCols + hi;
            let s = hashPair(lo, hi) & mask;
            for (;;) {
              const found = slots[2 * s];
              if (found === key) {
                slots[2 * s + 1] += w;
                break;
              }
              if (found === EMPTY_KEY) {
                slots[2 * s] = key;
                slots[2 * s + 1] = w;
                if (++this.size >= this.limit) this.makeRoom();
                break;
              }
              s = (s + 1) & mask;
            }
          }
          slots = this.slots;
          mask = this.mask;
        }
      }
      this.pairs += 2 * events;
      return;
    }
    const toRight = direction !== 'left';
    const toLeft = direction !== 'right';
    for (let i = 0; i < length; i++) {
      const a = ids[i];
      if (a < 0) continue;
      const end = i + k < length ? i + k : length - 1;
      for (let j = i + 1; j <= end; j++) {
        const b = ids[j];
        if (b < 0) continue;
        const w = weights[j - i];
        // a precedes b: b is a's right context, a is b's left context
        if (toRight) {
          events++;
          if (a < D && b < D) {
            const v = dense[a * D + b] + w;
            if (v < DENSE_LIMIT) dense[a * D + b] = v;
            else this.overflow(a * D + b, v, a, b);
          } else this.hashAdd(a, b, w);
        }
        if (toLeft) {
          events++;
          if (a < D && b < D) {
            const v = dense[b * D + a] + w;
            if (v < DENSE_LIMIT) dense[b * D + a] = v;
            else this.overflow(b * D + a, v, b, a);
          } else this.hashAdd(b, a, w);
        }
      }
    }
    this.pairs += events;
  }

  /** Adds term × document counts: each in-vocabulary token adds 1 to (its id, docIndex). */
  addDocument(ids: Int32Array, length: number, docIndex: number): void {
    for (let i = 0; i < length; i++) {
      if (ids[i] >= 0) {
        this.pairs++;
        this.hashAdd(ids[i], docIndex, 1);
      }
    }
  }

  /** A dense cell about to leave the uint32 range moves its sum to the hash (sums stay exact). */
  private overflow(cell: number, sum: number, row: number, col: number): void {
    this.dense[cell] = 0;
    this.hashAdd(row, col, sum);
  }

  private hashAdd(row: number, col: number, w: number): void {
    const key = row * this.nCols + col;
    const slots = this.slots;
    const mask = this.mask;
    let i = hashPair(row, col) & mask;
    for (;;) {
      const k = slots[2 * i];
      if (k === key) {
        slots[2 * i + 1] += w;
        return;
      }
      if (k === EMPTY_KEY) break;
      i = (i + 1) & mask;
    }
    slots[2 * i] = key;
    slots[2 * i + 1] = w;
    if (++this.size >= this.limit) this.makeRoom();
  }

  /** At the load limit: grow while under the capacity limit, else spill a run. */
  private makeRoom(): void {
    if (this.slots.length / 2 < this.maxCapacity) this.grow();
    else this.spill();
  }

  private grow(): void {
    const old = this.slots;
    const cap = old.length; // twice the old slot count
    this.slots = new Float64Array(2 * cap).fill(EMPTY_KEY);
    this.mask = cap - 1;
    this.limit = Math.floor(cap * LOAD);
    const nCols = this.nCols;
    for (let s = 0; s < old.length; s += 2) {
      const key = old[s];
      if (key === EMPTY_KEY) continue;
      const row = Math.floor(key / nCols);
      let i = hashPair(row, key - row * nCols) & this.mask;
      while (this.slots[2 * i] !== EMPTY_KEY) i = (i + 1) & this.mask;
      this.slots[2 * i] = key;
      this.slots[2 * i + 1] = old[s + 1];
    }
  }

  /**
   * The hash entries in both orientations, sorted by (row, col), as compressed sparse rows: a counting sort
   * by row, then each row's columns sorted on their own (values follow through a per-column scratch array),
   * which is much faster than one sort of packed keys and needs no second probe of the hash.
   */
  private sortedHash(): SortedRows {
    const { nCols, nRows, triangle } = this;
    const slots = this.slots;
    const rowStart = new Float64Array(nRows + 1);
    for (let s = 0; s < slots.length; s += 2) {
      const key = slots[s];
      if (key === EMPTY_KEY) continue;
      const row = Math.floor(key / nCols);
      rowStart[row + 1]++;
      if (triangle) {
        const col = key - row * nCols;
        if (col !== row) rowStart[col + 1]++;
      }
    }
    for (let r = 0; r < nRows; r++) rowStart[r + 1] += rowStart[r];
    const n = rowStart[nRows];
    const cols = new Uint32Array(n);
    const values = new Float64Array(n);
    const fill = rowStart.slice(0, nRows);
    for (let s = 0; s < slots.length; s += 2) {
      const key = slots[s];
      if (key === EMPTY_KEY) continue;
      const row = Math.floor(key / nCols);
      const col = key - row * nCols;
      const v = slots[s + 1];
      if (triangle && col === row) {
        cols[fill[row]] = col;
        values[fill[row]++] = 2 * v; // a pair of one term with itself was seen from both of its ends
        continue;
      }
      cols[fill[row]] = col;
      values[fill[row]++] = v;
      if (triangle) {
        cols[fill[col]] = row;
        values[fill[col]++] = v;
      }
    }
    sortRowColumns(rowStart, cols, values, nRows, nCols);
    return { rowStart, cols, values };
  }

  private clearHash(): void {
    this.slots.fill(EMPTY_KEY);
    this.size = 0;
  }

  /** Writes the hash entries as a sorted run and empties the hash. */
  private spill(): void {
    const file = this.spillFile();
    const writer = new RunWriter(file);
    const { rowStart, cols, values } = this.sortedHash();
    for (let r = 0; r < this.nRows; r++) {
      for (let p = rowStart[r]; p < rowStart[r + 1]; p++) writer.append(r, cols[p], values[p]);
    }
    writer.close();
    this.runs.push(file);
    this.clearHash();
  }

  /** Hands over everything accumulated; when runs were spilled, the rest is spilled too, so memory stays bounded. */
  finish(): AccumulatorHandover {
    if (this.runs.length > 0 && this.size > 0) this.spill();
    const rows: SortedRows = this.size === 0
      ? { rowStart: new Float64Array(this.nRows + 1), cols: new Uint32Array(0), values: new Float64Array(0) }
      : this.sortedHash();
    this.slots = new Float64Array(0);
    this.size = 0;
    return { denseSize: this.D, triangle: this.triangle, dense: this.dense, ...rows, runs: this.runs.slice() };
  }
}

/** Sorts the columns of each row in place, values alongside. */
function sortRowColumns(rowStart: Float64Array, cols: Uint32Array, values: Float64Array, nRows: number, nCols: number): void {
  // Values are parked by column in a scratch array while the row's columns are sorted natively; for very wide
  // matrices (document contexts over huge corpora) a packed (col, position) sort is used instead.
  const scratch = nCols <= 1 << 24 ? new Float64Array(nCols) : null;
  for (let r = 0; r < nRows; r++) {
    const a = rowStart[r];
    const b = rowStart[r + 1];
    if (b - a < 2) continue;
    const seg = cols.subarray(a, b);
    if (scratch !== null) {
      for (let p = a; p < b; p++) scratch[cols[p]] = values[p];
      seg.sort();
      for (let p = a; p < b; p++) values[p] = scratch[cols[p]];
    } else {
      const len = b - a;
      const packed = new Float64Array(len);
      for (let i = 0; i < len; i++) packed[i] = seg[i] * len + i;
      packed.sort();
      const vals = values.slice(a, b);
      for (let i = 0; i < len; i++) {
        const from = packed[i] % len;
        cols[a + i] = (packed[i] - from) / len;
        values[a + i] = vals[from];
      }
    }
  }
}