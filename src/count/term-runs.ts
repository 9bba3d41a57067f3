/**
 * Term runs: what a vocabulary mapper writes when its term table reaches its share of the memory budget (decision
 * 35). A run holds one epoch of the mapper's table (the terms it met since its last run) sorted by their bytes,
 * with each term's count, document frequency and two flags; the calling thread merges every mapper's runs (and
 * the tables of mappers that never spilled) by term bytes, summing as it goes, and keeps only the terms that
 * pass the vocabulary's count filters, so no table of all the corpus's distinct terms is ever held.
 *
 * A table can fill in the middle of a document. The document frequency then counts that document in both
 * epochs; the flags say so: OPEN, the term was in the document still being read when the run was written;
 * CONTINUED, the term was in the document the epoch started in the middle of. Equal terms of one mapper's
 * consecutive runs (in the merge, its earlier run first) with OPEN then CONTINUED, the two runs' documents being
 * the same, are one document counted twice.
 *
 * Record layout (little-endian): u32 term length, u8 flags, f64 count, u32 document frequency, the term's bytes.
 */
import { closeSync, openSync, readSync, rmSync } from 'node:fs';
import { wrapWriteError, writeBytesOrThrow } from '../store/atomic.js';
import { giveBuffer, takeBuffer } from '../store/buffer-pool.js';
import { compareBytes, sortByBytes, type TermBytes } from './term-table.js';

/** The term was in the document being read when its run was written. */
export const OPEN = 1;
/** The term was in the document its epoch started in the middle of. */
export const CONTINUED = 2;

const HEADER_BYTES = 17;
const BUFFER_BYTES = 1 << 20;

/** One written run: its file, whose mapper and which of its epochs, and the documents its flags refer to. */
export interface TermRun {
  file: string;
  mapper: number;
  epoch: number;
  /** Number (over all the mapper's documents) of the document the epoch started in the middle of, or -1. */
  continuedDoc: number;
  /** Number of the document still open when the run was written, or -1. */
  openDoc: number;
  /** Size of the file. */
  bytes: number;
}

/** A table's terms as a mapper hands them over: ids 0..n-1 with their bytes, sums and flags. */
export interface EpochTerms {
  terms: TermBytes;
  size: number;
  counts: Float64Array;
  docFreqs: Uint32Array;
  /** OPEN and CONTINUED bits per id, or null (none set). */
  flags: Uint8Array | null;
}

/** Writes one epoch's terms to `file`, sorted by their bytes; returns the bytes written. */
export function writeTermRun(file: string, epoch: EpochTerms): number {
  const { terms, size, counts, docFreqs, flags } = epoch;
  const order = new Uint32Array(size);
  for (let i = 0; i < size; i++) order[i] = i;
  sortByBytes(terms.arena, terms.offsets, order);
  let fd: number;
  try {
    fd = openSync(file, 'w');
  } catch (e) {
    throw wrapWriteError(e, file);
  }
  let buf = takeBuffer(BUFFER_BYTES);
  let fill = 0;
  let written = 0;
  try {
    for (let i = 0; i < size; i++) {
      const id = order[i];
      const s = terms.offsets[id];
      const len = terms.offsets[id + 1] - s;
      if (fill + HEADER_BYTES + len > buf.length) {
        writeBytesOrThrow(fd, buf, fill, file);
        written += fill;
        fill = 0;
        if (HEADER_BYTES + len > buf.length) {
          giveBuffer(buf);
          buf = takeBuffer(HEADER_BYTES + len);
        }
      }
      buf.writeUInt32LE(len, fill);
      buf[fill + 4] = flags === null ? 0 : flags[id];
      buf.writeDoubleLE(counts[id], fill + 5);
      buf.writeUInt32LE(docFreqs[id], fill + 13);
      fill += HEADER_BYTES;
      for (let k = 0; k < len; k++) buf[fill + k] = terms.arena[s + k];
      fill += len;
    }
    writeBytesOrThrow(fd, buf, fill, file);
    written += fill;
  } finally {
    closeSync(fd);
    giveBuffer(buf);
  }
  return written;
}

/** Terms in byte order from one source, one at a time: the current term is bytes[start, end) with its sums. */
abstract class TermSource {
  bytes: Uint8Array = new Uint8Array(0);
  start = 0;
  end = 0;
  count = 0;
  docFreq = 0;
  flags = 0;
  /** Bytes of its file read so far (0 for a table). */
  read = 0;
  /** Moves to the next term; false at the end. */
  abstract next(): boolean;
  abstract close(): void;
}

/** A run file read back record by record through one buffer. */
class RunSource extends TermSource {
  private buf: Buffer;
  private fill = 0;
  private pos = 0;
  private readonly fd: number;

  constructor(private readonly file: string) {
    super();
    this.buf = takeBuffer(BUFFER_BYTES);
    this.bytes = this.buf;
    try {
      this.fd = openSync(file, 'r');
    } catch (e) {
      giveBuffer(this.buf);
      throw new Error(`${file}: cannot read a term run: ${(e as Error).message}`);
    }
  }

  next(): boolean {
    if (!this.ensure(HEADER_BYTES)) {
      if (this.fill - this.pos !== 0) throw new Error(`${this.file}: term run ends inside a record`);
      return false;
    }
    const b = this.buf;
    const len = b.readUInt32LE(this.pos);
    this.flags = b[this.pos + 4];
    this.count = b.readDoubleLE(this.pos + 5);
    this.docFreq = b.readUInt32LE(this.pos + 13);
    if (!this.ensure(HEADER_BYTES + len)) throw new Error(`${this.file}: term run ends inside a record`);
    this.start = this.pos + HEADER_BYTES;
    this.end = this.start + len;
    this.pos = this.end;
    return true;
  }

  /** Whether `n` bytes from pos are in the buffer (read in when not, the buffer grown for a long term). */
  private ensure(n: number): boolean {
    if (this.fill - this.pos >= n) return true;
    if (n > this.buf.length) {
      const bigger = takeBuffer(n);
      this.buf.copy(bigger, 0, this.pos, this.fill);
      giveBuffer(this.buf);
      this.buf = bigger;
    } else this.buf.copy(this.buf, 0, this.pos, this.fill);
    this.fill -= this.pos;
    this.pos = 0;
    this.bytes = this.buf;
    while (this.fill < n) {
      const got = readSync(this.fd, this.buf, this.fill, this.buf.length - this.fill, this.read);
      if (got <= 0) return false;
      this.fill += got;
      this.read += got;
    }
    return true;
  }

  close(): void {
    closeSync(this.fd);
    giveBuffer(this.buf);
  }
}

/** A mapper's table held in memory (it never spilled), in the order of its terms' bytes. */
class TableSource extends TermSource {
  private i = -1;

  constructor(private readonly table: { terms: TermBytes; order: Uint32Array; counts: Float64Array; docFreqs: Uint32Array }) {
    super();
    this.bytes = table.terms.arena;
  }

  next(): boolean {
    const { order, terms, counts, docFreqs } = this.table;
    if (++this.i >= order.length) return false;
    const id = order[this.i];
    this.start = terms.offsets[id];
    this.end = terms.offsets[id + 1];
    this.count = counts[id];
    this.docFreq = docFreqs[id];
    return true;
  }

  close(): void {}
}

/** The kept terms of a merge, in byte order, with their sums. */
export interface KeptTerms {
  terms: TermBytes;
  counts: Float64Array;
  docFreqs: Uint32Array;
  /** Distinct terms of the corpus, kept or not. */
  distinct: number;
}

/** A source of the merge and the mapper and epoch it holds (ties of equal terms go in that order). */
export interface MergeInput {
  mapper: number;
  epoch: number;
  run: TermRun | null;
  table: { terms: TermBytes; order: Uint32Array; counts: Float64Array; docFreqs: Uint32Array } | null;
}

/** Distinct terms merged between two progress reports. */
const PROGRESS_TERMS = 1 << 16;

/**
 * Every source's terms merged by their bytes, equal terms summed (a document counted in two consecutive runs of
 * one mapper counted once), keeping only those with count ≥ minCount and document frequency ≥ minDocFreq. The
 * run files are removed once read. onProgress hears the bytes of the runs read so far.
 */
export function mergeTermRuns(
  inputs: MergeInput[], v: { minCount: number; minDocFreq: number; maxSize: number }, onProgress: (bytes: number) => void = () => {},
): KeptTerms {
  const order = inputs.map((_, i) => i).sort((a, b) => inputs[a].mapper - inputs[b].mapper || inputs[a].epoch - inputs[b].epoch);
  const sorted = order.map((i) => inputs[i]);
  const sources: TermSource[] = [];
  try {
    for (const input of sorted) sources.push(input.run !== null ? new RunSource(input.run.file) : new TableSource(input.table!));
    return mergeSources(sorted, sources, v, onProgress);
  } finally {
    for (const s of sources) s.close();
    for (const input of sorted) if (input.run !== null) rmSync(input.run.file, { force: true });
  }
}

function mergeSources(
  inputs: MergeInput[], sources: TermSource[], { minCount, minDocFreq, maxSize }: { minCount: number; minDocFreq: number; maxSize: number },
  onProgress: (bytes: number) => void,
): KeptTerms {
  // a binary heap of source indexes by current term, ties by index (so a mapper's runs come in epoch order)
  const less = (a: number, b: number): boolean => {
    const x = sources[a];
    const y = sources[b];
    const c = compareBytes(x.bytes, x.start, x.end, y.bytes, y.start, y.end);
    return c < 0 || (c === 0 && a < b);
  };
  const heap: number[] = [];
  const down = (at: number): void => {
    for (;;) {
      const l = 2 * at + 1;
      if (l >= heap.length) return;
      const c = l + 1 < heap.length && less(heap[l + 1], heap[l]) ? l + 1 : l;
      if (!less(heap[c], heap[at])) return;
      [heap[c], heap[at]] = [heap[at], heap[c]];
      at = c;
    }
  };
  for (let i = 0; i < sources.length; i++) if (sources[i].next()) heap.push(i);
  for (let i = (heap.length >> 1) - 1; i >= 0; i--) down(i);

  let arena = new Uint8Array(1 << 16);
  let fill = 0;
  let cap = 1024;
  let offsets = new Uint32Array(cap + 1);
  let counts = new Float64Array(cap);
  let docFreqs = new Uint32Array(cap);
  let kept = 0;
  let distinct = 0;
  while (heap.length > 0) {
    const first = heap[0];
    const { bytes, start, end } = sources[first];
    const len = end - start;
    // the term, copied: the sources move on while it is summed
    if (fill + len > arena.length) {
      let n = arena.length * 2;
      while (n < fill + len) n *= 2;
      const grown = new Uint8Array(n);
      grown.set(arena.subarray(0, fill));
      arena = grown;
    }
    for (let k = 0; k < len; k++) arena[fill + k] = bytes[start + k];
    let count = 0;
    let docFreq = 0;
    let prev = -1;
    let prevFlags = 0;
    do {
      const top = heap[0];
      const s = sources[top];
      count += s.count;
      docFreq += s.docFreq;
      // a mapper's consecutive runs of one term: the earlier's open document, the later's continued one
      if (prev >= 0 && inputs[prev].mapper === inputs[top].mapper && (prevFlags & OPEN) !== 0 && (s.flags & CONTINUED) !== 0
        && inputs[prev].run!.openDoc === inputs[top].run!.continuedDoc) docFreq--;
      prev = top;
      prevFlags = s.flags;
      if (s.next()) down(0);
      else {
        heap[0] = heap[heap.length - 1];
        heap.pop();
        if (heap.length > 0) down(0);
      }
    } while (heap.length > 0 && compareBytes(sources[heap[0]].bytes, sources[heap[0]].start, sources[heap[0]].end, arena, fill, fill + len) === 0);
    if (++distinct % PROGRESS_TERMS === 0) onProgress(sources.reduce((sum, x) => sum + x.read, 0));
    if (count < minCount || docFreq < minDocFreq) continue;
    if (maxSize > 0 && kept === 2 * maxSize) {
      kept = keepMost(maxSize, kept, arena, offsets, counts, docFreqs);
      // the term being added, copied at fill above, moves down after the kept ones
      arena.copyWithin(offsets[kept], fill, fill + len);
      fill = offsets[kept];
    }
    if (kept === cap) {
      cap *= 2;
      const o = new Uint32Array(cap + 1);
      o.set(offsets);
      offsets = o;
      const c = new Float64Array(cap);
      c.set(counts);
      counts = c;
      const d = new Uint32Array(cap);
      d.set(docFreqs);
      docFreqs = d;
    }
    counts[kept] = count;
    docFreqs[kept] = docFreq;
    fill += len;
    offsets[++kept] = fill;
  }
  return { terms: { arena: arena.subarray(0, fill), offsets: offsets.subarray(0, kept + 1) }, counts: counts.subarray(0, kept), docFreqs: docFreqs.subarray(0, kept), distinct };
}

/**
 * Of `kept` terms in byte order, the `most` that come first by count descending, ties by byte order (as the
 * vocabulary orders them), moved to the front in byte order; returns `most`. A term left out here could never
 * be in the vocabulary: those after it in byte order rank below it at an equal count. So the terms held stay
 * under twice vocabulary.maxSize.
 */
function keepMost(most: number, kept: number, arena: Uint8Array, offsets: Uint32Array, counts: Float64Array, docFreqs: Uint32Array): number {
  const ids = Array.from({ length: kept }, (_, i) => i);
  ids.sort((a, b) => counts[b] - counts[a] || a - b);
  const keep = ids.slice(0, most).sort((a, b) => a - b);
  let fill = 0;
  for (let i = 0; i < keep.length; i++) {
    const id = keep[i];
    // ids ascending: each term moves towards the front, never over one not yet moved
    arena.copyWithin(fill, offsets[id], offsets[id + 1]);
    fill += offsets[id + 1] - offsets[id];
    counts[i] = counts[id];
    docFreqs[i] = docFreqs[id];
    offsets[i + 1] = fill;
  }
  return keep.length;
}
