/**
 * Open-addressing hash table of terms keyed by their UTF-8 bytes, on typed arrays: the bytes of every
 * term live in one growable arena, a term's id is its insertion index, and no string is made per lookup.
 */
const EMPTY = -1;

/** 32-bit FNV-1a hash of bytes[start, end) (Fowler, Noll, Vo; common practice, no source). */
export function hashBytes(bytes: Uint8Array, start: number, end: number): number {
  let h = 0x811c9dc5;
  for (let i = start; i < end; i++) h = Math.imul(h ^ bytes[i], 0x01000193);
  return h >>> 0;
}

/** Orders two byte strings lexicographically; for UTF-8 this is Unicode code point order. */
export function compareBytes(a: Uint8Array, aStart: number, aEnd: number, b: Uint8Array, bStart: number, bEnd: number): number {
  const n = Math.min(aEnd - aStart, bEnd - bStart);
  for (let i = 0; i < n; i++) {
    const d = a[aStart + i] - b[bStart + i];
    if (d !== 0) return d;
  }
  return aEnd - aStart - (bEnd - bStart);
}

/** The serialisable content of a term table: term bytes back to back, and each term's start offset (n + 1 offsets). */
export interface TermBytes {
  arena: Uint8Array;
  offsets: Uint32Array;
}

/** What internHashed returns when the term is new and the table is at its limit. */
export const TABLE_FULL = -1;

export class TermTable {
  /**
   * Most terms and most arena bytes the table takes (a bound on its memory, set by the vocabulary pass): a new
   * term past either is not inserted (TABLE_FULL). With a power-of-two term limit, no array grows past it.
   */
  limit = Infinity;
  arenaLimit = Infinity;
  /** Term bytes, back to back in id order. */
  arena: Uint8Array;
  arenaFill = 0;
  /** starts[id] is the arena offset of term id; its end is starts[id + 1]. */
  starts: Uint32Array;
  private hashes: Uint32Array;
  private slots: Int32Array;
  private mask: number;
  size = 0;

  constructor(expectedTerms = 1024) {
    let cap = 16;
    while (cap * 0.5 < expectedTerms) cap *= 2;
    this.slots = new Int32Array(cap).fill(EMPTY);
    this.mask = cap - 1;
    this.starts = new Uint32Array(Math.max(16, expectedTerms) + 1);
    this.hashes = new Uint32Array(Math.max(16, expectedTerms));
    this.arena = new Uint8Array(Math.max(1024, expectedTerms * 8));
  }

  /** A table holding the given terms with ids 0..n-1 in order. */
  static fromTermBytes(t: TermBytes): TermTable {
    const n = t.offsets.length - 1;
    const table = new TermTable(n);
    for (let i = 0; i < n; i++) table.intern(t.arena, t.offsets[i], t.offsets[i + 1]);
    return table;
  }

  /** The id of bytes[start, end), or -1 when absent. */
  find(bytes: Uint8Array, start: number, end: number): number {
    return this.findHashed(bytes, start, end, hashBytes(bytes, start, end));
  }
  findHashed(bytes: Uint8Array, start: number, end: number, h: number): number {
    const len = end - start;
    const { slots, starts, arena, hashes, mask } = this;
    for (let i = h & mask; ; i = (i + 1) & mask) {
      const id = slots[i];
      if (id === EMPTY) return -1;
      if (hashes[id] !== h) continue;
      const s = starts[id];
      if (starts[id + 1] - s !== len) continue;
      let k = 0;
      while (k < len && arena[s + k] === bytes[start + k]) k++;
      if (k === len) return id;
    }
  }

  /** The id of bytes[start, end), inserting the term when absent. */
  intern(bytes: Uint8Array, start: number, end: number): number {
    return this.internHashed(bytes, start, end, hashBytes(bytes, start, end));
  }
  internHashed(bytes: Uint8Array, start: number, end: number, h: number): number {
    const len = end - start;
    let i = h & this.mask;
    for (; ; i = (i + 1) & this.mask) {
      const id = this.slots[i];
      if (id === EMPTY) break;
      if (this.hashes[id] !== h) continue;
      const s = this.starts[id];
      if (this.starts[id + 1] - s !== len) continue;
      let k = 0;
      while (k < len && this.arena[s + k] === bytes[start + k]) k++;
      if (k === len) return id;
    }
    const id = this.size;
    // a term alone may pass the arena's limit (an empty table takes any term)
    if (id >= this.limit || (this.arenaFill + len > this.arenaLimit && id > 0)) return TABLE_FULL;
    if (id >= this.hashes.length) this.growIds();
    if (this.arenaFill + len > this.arena.length) this.growArena(len);
    // byte by byte: bytes is a Buffer or a plain Uint8Array, whose subarray methods differ, and a call of
    // either would send the compiled caller back to the interpreter when the other comes
    const { arena } = this;
    for (let k = 0; k < len; k++) arena[this.arenaFill + k] = bytes[start + k];
    this.starts[id] = this.arenaFill;
    this.arenaFill += len;
    this.starts[id + 1] = this.arenaFill;
    this.hashes[id] = h;
    this.slots[i] = id;
    this.size++;
    if (this.size * 2 > this.slots.length) this.rehash();
    return id;
  }

  /**
   * The hash slots and hashes as sortByBytes's scratch arrays (two halves of the slots, which are at least twice
   * the terms, and the hashes), for sorting the table's terms just before it is emptied (clear) or dropped: the
   * table cannot be used again until then.
   */
  sortScratch(): SortScratch {
    const half = this.slots.length >>> 1;
    const { buffer, byteOffset } = this.slots;
    return [new Uint32Array(buffer, byteOffset, half), new Uint32Array(buffer, byteOffset + 4 * half, half), new Uint32Array(this.hashes.buffer, this.hashes.byteOffset, this.hashes.length)];
  }

  /** Empties the table, keeping its arrays (an arena grown past its limit by one long term is made anew). */
  clear(): void {
    this.slots.fill(EMPTY);
    this.size = 0;
    this.arenaFill = 0;
    if (this.arena.length > this.arenaLimit) this.arena = new Uint8Array(this.arenaLimit);
  }

  /** The term bytes of id (a view into the arena: copy before the table grows). */
  bytesOf(id: number): Uint8Array {
    return this.arena.subarray(this.starts[id], this.starts[id + 1]);
  }

  private growIds(): void {
    const n = this.hashes.length * 2;
    const starts = new Uint32Array(n + 1);
    starts.set(this.starts);
    const hashes = new Uint32Array(n);
    hashes.set(this.hashes);
    this.starts = starts;
    this.hashes = hashes;
  }

  private growArena(need: number): void {
    let n = this.arena.length * 2;
    while (n < this.arenaFill + need) n *= 2;
    const arena = new Uint8Array(n);
    arena.set(this.arena.subarray(0, this.arenaFill));
    this.arena = arena;
  }

  private rehash(): void {
    const cap = this.slots.length * 2;
    const slots = new Int32Array(cap).fill(EMPTY);
    const mask = cap - 1;
    for (let id = 0; id < this.size; id++) {
      let i = this.hashes[id] & mask;
      while (slots[i] !== EMPTY) i = (i + 1) & mask;
      slots[i] = id;
    }
    this.slots = slots;
    this.mask = mask;
  }
}

/** Below this many ids a range is sorted by insertion (sortByBytes). */
const INSERTION_SORT_IDS = 12;
/** From this many ids on, sortByBytes sorts by the terms' first 8 bytes with a radix sort first. */
const RADIX_SORT_IDS = 1 << 16;

/** Three arrays of at least as many entries as the ids, that sortByBytes may overwrite. */
export type SortScratch = [Uint32Array, Uint32Array, Uint32Array];

/**
 * Sorts ids (indexes into `offsets`: term id's bytes are arena[offsets[id], offsets[id + 1])) by their bytes, in
 * lexicographic order (for UTF-8, code point order), shorter before longer at a common prefix. The terms must be
 * distinct (as a table's are).
 *
 * Many ids are put in order of their first 4 bytes (zero-padded) by a least-significant-digit radix sort on one
 * 32-bit key read once per term, in arrays read and written in sequence; only ids with equal keys are then
 * compared byte by byte. The comparison sort alone reads a term's bytes where they lie in
 * the arena at every level of the partitioning, a cache miss each in a large table. The radix sort's arrays are
 * `scratch` when given (a table lends its hash slots and hashes, TermTable.sortScratch, so that sorting it
 * takes no memory beyond its own), else new.
 */
export function sortByBytes(arena: Uint8Array, offsets: Uint32Array, ids: Uint32Array, scratch: SortScratch | null = null): void {
  const n = ids.length;
  if (n < RADIX_SORT_IDS) {
    sortByBytesCompared(arena, offsets, ids);
    return;
  }
  const fits = scratch !== null && scratch.every((a) => a.length >= n);
  let key = fits ? scratch[0] : new Uint32Array(n);
  let keyOut = fits ? scratch[1] : new Uint32Array(n);
  let idsIn: Uint32Array = ids;
  let idsOut: Uint32Array = fits ? scratch[2] : new Uint32Array(n);
  for (let i = 0; i < n; i++) {
    const s = offsets[ids[i]];
    const len = offsets[ids[i] + 1] - s;
    let a = 0;
    for (let k = 0; k < 4; k++) a = (a << 8) | (k < len ? arena[s + k] : 0);
    key[i] = a >>> 0;
  }
  const counts = new Uint32Array(256);
  // 4 passes of one byte, least significant first; a pass whose byte is the same everywhere moves nothing
  for (let shift = 0; shift < 32; shift += 8) {
    counts.fill(0);
    for (let i = 0; i < n; i++) counts[(key[i] >>> shift) & 255]++;
    if (counts[(key[0] >>> shift) & 255] === n) continue;
    let sum = 0;
    for (let d = 0; d < 256; d++) {
      const c = counts[d];
      counts[d] = sum;
      sum += c;
    }
    for (let i = 0; i < n; i++) {
      const at = counts[(key[i] >>> shift) & 255]++;
      keyOut[at] = key[i];
      idsOut[at] = idsIn[i];
    }
    [key, keyOut] = [keyOut, key];
    [idsIn, idsOut] = [idsOut, idsIn];
  }
  if (idsIn !== ids) ids.set(idsIn.subarray(0, n));
  // ids with the same first 4 bytes (or one term's zero bytes where another ends), in order of all their bytes
  for (let i = 0; i < n;) {
    let j = i + 1;
    while (j < n && key[j] === key[i]) j++;
    if (j - i > 1) multikeySort(arena, offsets, ids, i, j, 0);
    i = j;
  }
}

/** sortByBytes by comparisons alone (multikeySort of all ids): the path below RADIX_SORT_IDS, for comparisons. */
export function sortByBytesCompared(arena: Uint8Array, offsets: Uint32Array, ids: Uint32Array): void {
  multikeySort(arena, offsets, ids, 0, ids.length, 0);
}

/**
 * Multikey quicksort of ids[from, to) (Bentley and Sedgewick, "Fast algorithms for sorting and searching strings",
 * SODA 1997): a three-way partition on the byte at depth d, the middle part then taken at d + 1, so no byte is
 * compared twice more than the partitions need; an id whose term has ended sorts before every byte.
 */
function multikeySort(arena: Uint8Array, offsets: Uint32Array, ids: Uint32Array, from: number, to: number, depth: number): void {
  // ranges still to sort: lo, hi, depth
  const stack: number[] = [from, to, depth];
  while (stack.length > 0) {
    let d = stack.pop()!;
    let hi = stack.pop()!;
    let lo = stack.pop()!;
    for (;;) {
      if (hi - lo < INSERTION_SORT_IDS) {
        insertionSortByBytes(arena, offsets, ids, lo, hi, d);
        break;
      }
      const v = median3(byteAt(arena, offsets, ids[lo], d), byteAt(arena, offsets, ids[(lo + hi) >>> 1], d), byteAt(arena, offsets, ids[hi - 1], d));
      let lt = lo;
      let gt = hi - 1;
      let i = lo;
      while (i <= gt) {
        const b = byteAt(arena, offsets, ids[i], d);
        if (b < v) {
          const t = ids[lt];
          ids[lt++] = ids[i];
          ids[i++] = t;
        } else if (b > v) {
          const t = ids[gt];
          ids[gt--] = ids[i];
          ids[i] = t;
        } else i++;
      }
      // [lo, lt) below v, [lt, gt] equal to v at depth d, (gt, hi) above v
      if (lt - lo > 1) stack.push(lo, lt, d);
      if (hi - gt > 2) stack.push(gt + 1, hi, d);
      // the ids equal at d go on at d + 1, unless their terms ended at d (then they are one term: distinct terms)
      if (v < 0) break;
      lo = lt;
      hi = gt + 1;
      d++;
    }
  }
}

/** The byte of term id at depth d, or -1 past its end. */
function byteAt(arena: Uint8Array, offsets: Uint32Array, id: number, d: number): number {
  const s = offsets[id] + d;
  return s < offsets[id + 1] ? arena[s] : -1;
}

function median3(a: number, b: number, c: number): number {
  return a < b ? (b < c ? b : a < c ? c : a) : a < c ? a : b < c ? c : b;
}

/** ids[lo, hi), equal in their first d bytes, sorted by their bytes from d on. */
function insertionSortByBytes(arena: Uint8Array, offsets: Uint32Array, ids: Uint32Array, lo: number, hi: number, d: number): void {
  for (let i = lo + 1; i < hi; i++) {
    const id = ids[i];
    let j = i - 1;
    while (j >= lo) {
      const other = ids[j];
      if (compareBytes(arena, offsets[other] + d, offsets[other + 1], arena, offsets[id] + d, offsets[id + 1]) <= 0) break;
      ids[j + 1] = other;
      j--;
    }
    ids[j + 1] = id;
  }
}
