/**
 * Co-occurrence accumulation without per-pair objects: a dense block for the pairs of the most frequent
 * terms (ids are ranked by frequency, so "frequent" is simply id < denseSize) and an open-addressing hash of
 * packed keys for the rest. Symmetric windows store each unordered pair once (the matrix is symmetric), which
 * halves the work; both orientations are written out when entries leave the accumulator.
 *
 * Hash events are first appended to a small staging buffer and added to the hash a few thousand at a time, in
 * the order they arrived. The hash is far larger than the processor's caches, so nearly every probe misses; in
 * the window loop each miss stalls the loop, while in the tight loop over the staged events the home slots of
 * all of them are loaded first (no load depends on another, so their misses overlap) and then probed in order.
 * Because events are added in arrival order, every sum (even of non-integer weights) and every spill point is
 * exactly what adding each event at once gives: spilled runs and sorted rows do not depend on the staging.
 *
 * Symmetric windows may also have a dense band: pairs of one of the `bandRows` most frequent terms with a term
 * past the dense block (the frequent terms meet every other term), in bandRows × nCols uint32 cells.
 *
 * Memory: the hash (16 bytes per slot, `capacity` slots at most), the sorted copy made at a spill (12 bytes per
 * entry and orientation), kept from one spill to the next with its row and column scratch (8 bytes per row and
 * per column), 80 KiB of staging, and the dense block and band (sized by planAccumulators from the budget).
 *
 * Weights reaching here are integers (harmonic weights are scaled, see windowWeights), so every sum is exact and
 * independent of the order in which pairs arrive, runs spill or partial counts merge.
 */
import { KindredError } from '../errors.js';
import { RunWriter } from './runs.js';

const EMPTY_KEY = -1;
/** Dense cells are uint32: a sum reaching this moves to the hash. */
const DENSE_LIMIT = 2 ** 32;
/** Load factor at which the hash grows or, at its capacity limit, spills. */
const LOAD = 0.7;
/** Packed keys row * nCols + col are exact doubles only below this. */
const MAX_KEYS = 2 ** 53;
/** Hash events staged before they are added to the hash (16 bytes each: the buffer stays in the L1/L2 cache). */
const STAGE_EVENTS = 4096;

export interface AccumulatorOptions {
  nRows: number;
  nCols: number;
  /** Rows and columns below this id go to the dense block (0 for none; weights must then be integers). */
  denseSize: number;
  /** Store unordered pairs once (symmetric windows). */
  triangle: boolean;
  /** Hash slots (a power of two) at which a sorted run is spilled. */
  capacity: number;
  /**
   * Symmetric windows: pairs whose smaller id is below this (≤ denseSize) and larger id at least denseSize go to a
   * dense band of bandRows × nCols cells instead of the hash (the most frequent terms meet every other term).
   */
  bandRows?: number;
}

/** What an accumulator hands to the merge: its dense block, its remaining hash entries sorted, its spilled runs. */
export interface AccumulatorPartial {
  denseSize: number;
  triangle: boolean;
  /** Dense cells: triangle ? index hi*(hi+1)/2 + lo : row*denseSize + col. */
  dense: Uint32Array;
  /** Band cells lo * nCols + hi, for lo < bandRows ≤ denseSize ≤ hi (empty when bandRows is 0). */
  band: Uint32Array;
  bandRows: number;
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

/**
 * 32 well-mixed bits of a packed key (< 2^53): its low and high words combined, then the finalizer of
 * MurmurHash3 (Appleby, "MurmurHash3", 2011: fmix32).
 */
function hashKey(key: number): number {
  let h = (key >>> 0) ^ Math.imul((key / 4294967296) | 0, 0x27d4eb2f);
  h ^= h >>> 16;
  h = Math.imul(h, 0x85ebca6b);
  h ^= h >>> 13;
  h = Math.imul(h, 0xc2b2ae35);
  return (h ^ (h >>> 16)) >>> 0;
}

export class PairAccumulator {
  readonly dense: Uint32Array;
  readonly band: Uint32Array;
  private readonly B: number;
  private readonly D: number;
  private readonly nCols: number;
  private readonly nRows: number;
  private readonly triangle: boolean;
  private readonly maxCapacity: number;
  /** Interleaved slots: [2i] key (row * nCols + col, or -1), [2i + 1] summed weight. */
  private slots: Float64Array;
  private mask: number;
  private limit: number;
  /** Distinct entries in the hash (staged events not yet included). */
  private entries = 0;
  /** Hash events not yet added: [2e] key, [2e + 1] weight, in arrival order. */
  private readonly stage = new Float64Array(2 * STAGE_EVENTS);
  /** Numbers used in `stage` (twice the events staged). */
  private staged = 0;
  /** Scratch: the hashes of the staged events. */
  private readonly hashes = new Uint32Array(STAGE_EVENTS);
  /** Scratch of sortedHash, kept from one spill to the next: row starts and fill positions, columns, values. */
  private spillRowStart: Float64Array | null = null;
  private rowFill: Float64Array | null = null;
  private spillCols: Uint32Array | null = null;
  private spillValues: Float64Array | null = null;
  /** Scratch of sortRowColumns: a value per column (null for very wide matrices). */
  private colScratch: Float64Array | null = null;
  /** Sum of the slots loaded ahead (kept so that those loads are not optimized away). */
  private touched = 0;
  /** Pair events added, counted per orientation (a symmetric event counts twice). */
  pairs = 0;
  readonly runs: string[] = [];

  constructor(opts: AccumulatorOptions, private readonly spillFile: () => string) {
    if (opts.nRows * opts.nCols > MAX_KEYS) {
      throw new KindredError(
        `contexts: ${opts.nRows} terms × ${opts.nCols} contexts exceed 2^53 pair keys; raise vocabulary.minCount or split the corpus`,
      );
    }
    this.D = opts.denseSize;
    this.nCols = opts.nCols;
    this.nRows = opts.nRows;
    this.triangle = opts.triangle;
    this.maxCapacity = opts.capacity;
    // shared memory: the merge threads read the dense block (and the handed-over rows) without a copy
    this.dense = new Uint32Array(new SharedArrayBuffer(denseBytes(this.D, this.triangle)));
    this.B = opts.triangle ? Math.min(opts.bandRows ?? 0, this.D) : 0;
    this.band = new Uint32Array(new SharedArrayBuffer(4 * this.B * opts.nCols));
    // start at a quarter of the capacity, at most 2^20 slots, and double up to it: small inputs stay small (the
    // size at which the hash spills, and so every run, is that of a table starting at 2^20 or the capacity)
    let cap = Math.min(1 << 20, opts.capacity);
    while (cap % 2 === 0 && cap / 2 >= 16 && cap * 4 > opts.capacity) cap /= 2;
    this.slots = new Float64Array(2 * cap).fill(EMPTY_KEY);
    this.mask = cap - 1;
    this.limit = Math.floor(cap * LOAD);
  }

  /** Distinct pairs held in the hash. Staged events are added first (which may spill, as adding them at once would have). */
  get size(): number {
    this.drain();
    return this.entries;
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
      // the hot loop of the build: staging a hash event is written out here rather than called
      const nCols = this.nCols;
      const stage = this.stage;
      const band = this.band;
      const B = this.B;
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
            this.overflow(dense, cell, v, lo, hi);
          } else if (lo < B) {
            const cell = lo * nCols + hi;
            const v = band[cell] + w;
            if (v < DENSE_LIMIT) {
              band[cell] = v;
              continue;
            }
            this.overflow(band, cell, v, lo, hi);
          } else {
            const n = this.staged;
            stage[n] = lo * nCols + hi;
            stage[n + 1] = w;
            this.staged = n + 2;
            if (n + 2 === 2 * STAGE_EVENTS) this.drain();
          }
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
            else this.overflow(dense, a * D + b, v, a, b);
          } else this.hashAdd(a, b, w);
        }
        if (toLeft) {
          events++;
          if (a < D && b < D) {
            const v = dense[b * D + a] + w;
            if (v < DENSE_LIMIT) dense[b * D + a] = v;
            else this.overflow(dense, b * D + a, v, b, a);
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

  /** A dense or band cell about to leave the uint32 range moves its sum to the hash (sums stay exact). */
  private overflow(cells: Uint32Array, cell: number, sum: number, row: number, col: number): void {
    cells[cell] = 0;
    this.hashAdd(row, col, sum);
  }

  /** Stages w for the entry (row, col). */
  private hashAdd(row: number, col: number, w: number): void {
    const n = this.staged;
    this.stage[n] = row * this.nCols + col;
    this.stage[n + 1] = w;
    this.staged = n + 2;
    if (n + 2 === 2 * STAGE_EVENTS) this.drain();
  }

  /**
   * Adds the staged events to the hash in arrival order. The first pass hashes them and loads each one's home
   * slot: those loads are independent, so their cache misses overlap; the second pass probes from the cache.
   */
  private drain(): void {
    const n = this.staged;
    if (n === 0) return;
    const stage = this.stage;
    const hashes = this.hashes;
    let slots = this.slots;
    let mask = this.mask;
    const events = n >> 1;
    for (let e = 0; e < events; e++) hashes[e] = hashKey(stage[2 * e]);
    let touched = 0;
    for (let e = 0; e < events; e++) touched += slots[2 * (hashes[e] & mask)];
    this.touched = touched;
    let entries = this.entries;
    let limit = this.limit;
    for (let o = 0, e = 0; o < n; o += 2, e++) {
      const key = stage[o];
      let i = hashes[e] & mask;
      for (;;) {
        const found = slots[2 * i];
        if (found === key) {
          slots[2 * i + 1] += stage[o + 1];
          break;
        }
        if (found === EMPTY_KEY) {
          slots[2 * i] = key;
          slots[2 * i + 1] = stage[o + 1];
          if (++entries >= limit) {
            this.entries = entries;
            this.makeRoom();
            slots = this.slots;
            mask = this.mask;
            limit = this.limit;
            entries = this.entries;
          }
          break;
        }
        i = (i + 1) & mask;
      }
    }
    this.entries = entries;
    this.staged = 0;
  }

  /** At the load limit: grow while under the capacity limit, else spill a run. */
  private makeRoom(): void {
    if (this.slots.length / 2 < this.maxCapacity) this.grow();
    else this.spill();
  }

  private grow(): void {
    const old = this.slots;
    const cap = old.length; // twice the old slot count
    const slots = new Float64Array(2 * cap).fill(EMPTY_KEY);
    const mask = cap - 1;
    for (let s = 0; s < old.length; s += 2) {
      const key = old[s];
      if (key === EMPTY_KEY) continue;
      let i = hashKey(key) & mask;
      while (slots[2 * i] !== EMPTY_KEY) i = (i + 1) & mask;
      slots[2 * i] = key;
      slots[2 * i + 1] = old[s + 1];
    }
    this.slots = slots;
    this.mask = mask;
    this.limit = Math.floor(cap * LOAD);
  }

  /**
   * The hash entries in both orientations, sorted by (row, col), as compressed sparse rows: a counting sort
   * by row, then each row's columns sorted on their own, which is much faster than one sort of packed keys and
   * needs no second probe of the hash. For a spill the arrays are the accumulator's own, reused from one spill
   * to the next (fresh memory is slow to touch for the first time); for the handover they are new, in shared
   * memory, so the threads that merge them read them where they are.
   */
  private sortedHash(forSpill: boolean): SortedRows {
    const { nCols, nRows, triangle } = this;
    const slots = this.slots;
    let rowStart: Float64Array;
    if (forSpill) {
      this.spillRowStart ??= new Float64Array(nRows + 1);
      rowStart = this.spillRowStart.fill(0);
    } else {
      rowStart = new Float64Array(new SharedArrayBuffer(8 * (nRows + 1)));
    }
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
    let cols: Uint32Array;
    let values: Float64Array;
    if (forSpill) {
      if (this.spillCols === null || this.spillCols.length < n) {
        // every spill holds about as many entries: room for the most a full hash can give (both orientations)
        const room = Math.max(n, 2 * Math.floor(this.maxCapacity * LOAD));
        this.spillCols = new Uint32Array(room);
        this.spillValues = new Float64Array(room);
      }
      cols = this.spillCols.subarray(0, n);
      values = this.spillValues!.subarray(0, n);
    } else {
      cols = new Uint32Array(new SharedArrayBuffer(4 * n));
      values = new Float64Array(new SharedArrayBuffer(8 * n));
    }
    this.rowFill ??= new Float64Array(nRows);
    const fill = this.rowFill;
    fill.set(rowStart.subarray(0, nRows));
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
    if (nCols <= 1 << 24) this.colScratch ??= new Float64Array(nCols);
    sortRowColumns(rowStart, cols, values, nRows, this.colScratch);
    return { rowStart, cols, values };
  }

  private clearHash(): void {
    this.slots.fill(EMPTY_KEY);
    this.entries = 0;
  }

  /** Writes the hash entries as a sorted run and empties the hash. */
  private spill(): void {
    const file = this.spillFile();
    const writer = new RunWriter(file);
    const { rowStart, cols, values } = this.sortedHash(true);
    for (let r = 0; r < this.nRows; r++) {
      for (let p = rowStart[r]; p < rowStart[r + 1]; p++) writer.append(r, cols[p], values[p]);
    }
    writer.close();
    this.runs.push(file);
    this.clearHash();
  }

  /** Hands over everything accumulated; when runs were spilled, the rest is spilled too, so memory stays bounded. */
  finish(): AccumulatorHandover {
    this.drain();
    if (this.runs.length > 0 && this.entries > 0) this.spill();
    const rows: SortedRows = this.entries === 0
      ? { rowStart: new Float64Array(this.nRows + 1), cols: new Uint32Array(0), values: new Float64Array(0) }
      : this.sortedHash(false);
    this.slots = new Float64Array(0);
    this.entries = 0;
    this.spillRowStart = this.rowFill = this.colScratch = this.spillValues = null;
    this.spillCols = null;
    return { denseSize: this.D, triangle: this.triangle, dense: this.dense, band: this.band, bandRows: this.B, ...rows, runs: this.runs.slice() };
  }
}

/** Rows this short are sorted by insertion, values moving with their columns. */
const SHORT_ROW = 16;

/**
 * Sorts the columns of each row in place, values alongside. Short rows by insertion; longer ones natively, the
 * values parked by column in `scratch` meanwhile, or, for very wide matrices (document contexts over huge
 * corpora; scratch null), through a packed (col, position) sort.
 */
function sortRowColumns(rowStart: Float64Array, cols: Uint32Array, values: Float64Array, nRows: number, scratch: Float64Array | null): void {
  for (let r = 0; r < nRows; r++) {
    const a = rowStart[r];
    const b = rowStart[r + 1];
    if (b - a < 2) continue;
    if (b - a <= SHORT_ROW) {
      for (let p = a + 1; p < b; p++) {
        const c = cols[p];
        const v = values[p];
        let q = p - 1;
        while (q >= a && cols[q] > c) {
          cols[q + 1] = cols[q];
          values[q + 1] = values[q];
          q--;
        }
        cols[q + 1] = c;
        values[q + 1] = v;
      }
      continue;
    }
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
