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

export class TermTable {
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
    if (id + 1 >= this.hashes.length) this.growIds();
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

  /** The term bytes of id (a view into the arena: copy before the table grows). */
  bytesOf(id: number): Uint8Array {
    return this.arena.subarray(this.starts[id], this.starts[id + 1]);
  }

  /** Copies of the arena and offsets, for sending to another thread. */
  toTermBytes(): TermBytes {
    return { arena: this.arena.slice(0, this.arenaFill), offsets: this.starts.slice(0, this.size + 1) };
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
