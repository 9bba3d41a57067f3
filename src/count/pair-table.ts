/**
 * Open-addressing hash table of (row, col) -> summed weight, on typed arrays.
 * Weights are integers (window weights are scaled to integers before they get here), so sums are exact
 * and independent of the order in which pairs arrive, runs spill or partial tables merge.
 */
const EMPTY = 0xffffffff;

function hashPair(row: number, col: number): number {
  const h = (Math.imul(row, 0x9e3779b1) ^ Math.imul(col + 0x7f4a7c15, 0x85ebca77)) >>> 0;
  return h ^ (h >>> 15);
}

export class PairTable {
  private rows: Uint32Array;
  private cols: Uint32Array;
  private values: Float64Array;
  private mask: number;
  size = 0;

  /** @param maxCapacity slot count (a power of two) the table may grow to before it reports full */
  constructor(readonly maxCapacity: number, initialCapacity = 1 << 16) {
    const cap = Math.min(initialCapacity, maxCapacity);
    this.rows = new Uint32Array(cap).fill(EMPTY);
    this.cols = new Uint32Array(cap);
    this.values = new Float64Array(cap);
    this.mask = cap - 1;
  }

  /** Bytes one slot takes, for sizing the table from a memory budget. */
  static readonly BYTES_PER_SLOT = 4 + 4 + 8;

  /** True when the table is at its capacity limit and should be spilled. */
  get full(): boolean {
    return this.size >= this.loadLimit(this.rows.length) && this.rows.length >= this.maxCapacity;
  }

  private loadLimit(cap: number): number {
    return Math.floor(cap * 0.7);
  }

  add(row: number, col: number, weight: number): void {
    let i = hashPair(row, col) & this.mask;
    const rows = this.rows;
    for (;;) {
      const r = rows[i];
      if (r === EMPTY) break;
      if (r === row && this.cols[i] === col) {
        this.values[i] += weight;
        return;
      }
      i = (i + 1) & this.mask;
    }
    rows[i] = row;
    this.cols[i] = col;
    this.values[i] = weight;
    this.size++;
    if (this.size >= this.loadLimit(rows.length) && rows.length < this.maxCapacity) this.grow();
  }

  private grow(): void {
    const oldRows = this.rows;
    const oldCols = this.cols;
    const oldValues = this.values;
    const cap = oldRows.length * 2;
    this.rows = new Uint32Array(cap).fill(EMPTY);
    this.cols = new Uint32Array(cap);
    this.values = new Float64Array(cap);
    this.mask = cap - 1;
    this.size = 0;
    for (let i = 0; i < oldRows.length; i++) {
      if (oldRows[i] !== EMPTY) this.add(oldRows[i], oldCols[i], oldValues[i]);
    }
  }

  /**
   * Calls emit for every entry in (row, col) order, then empties the table.
   * Sorting runs over a Float64Array of packed keys row * nCols + col (exact below 2^53).
   */
  drainSorted(nCols: number, emit: (row: number, col: number, value: number) => void): void {
    const keys = new Float64Array(this.size);
    const slots = new Uint32Array(this.size);
    let n = 0;
    for (let i = 0; i < this.rows.length; i++) {
      if (this.rows[i] !== EMPTY) keys[n++] = this.rows[i] * nCols + this.cols[i];
    }
    keys.sort();
    // Recover each key's slot by probing; a second pass keeps the sort on plain numbers.
    for (let k = 0; k < n; k++) {
      const row = Math.floor(keys[k] / nCols);
      const col = keys[k] - row * nCols;
      slots[k] = this.find(row, col);
    }
    for (let k = 0; k < n; k++) {
      const s = slots[k];
      emit(this.rows[s], this.cols[s], this.values[s]);
    }
    this.rows.fill(EMPTY);
    this.size = 0;
  }

  private find(row: number, col: number): number {
    let i = hashPair(row, col) & this.mask;
    while (!(this.rows[i] === row && this.cols[i] === col)) i = (i + 1) & this.mask;
    return i;
  }
}
