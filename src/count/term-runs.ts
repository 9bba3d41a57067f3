/**
 * Term runs: what a vocabulary mapper writes when its term table reaches its share of the memory budget (decision
 * 35). A run holds one epoch of the mapper's table (the terms it met since its last run) sorted by their bytes,
 * with each term's count, document frequency and two flags; the calling thread merges every mapper's runs (and
 * the tables of mappers that never spilled, written as runs too) by term bytes, summing as it goes, and keeps
 * only the terms that pass the vocabulary's count filters, so no table of all the corpus's distinct terms is
 * ever held. The merge runs on the threads, each task over a range of terms (cut at terms of the runs' sparse
 * indexes), so its results, in range order, are one merge's.
 *
 * A table can fill in the middle of a document. The document frequency then counts that document in both
 * epochs; the flags say so: OPEN, the term was in the document still being read when the run was written;
 * CONTINUED, the term was in the document the epoch started in the middle of. Equal terms of one mapper's
 * consecutive runs (in the merge, its earlier run first) with OPEN then CONTINUED, the two runs' documents being
 * the same, are one document counted twice.
 *
 * Record layout (little-endian): u32 term length, u8 flags, f64 count, u32 document frequency, the term's bytes.
 */
import { closeSync, openSync, readSync } from 'node:fs';
import { wrapWriteError, writeBytesOrThrow } from '../store/atomic.js';
import { giveBuffer, takeBuffer } from '../store/buffer-pool.js';
import { compareBytes, sortByBytes, type SortScratch, type TermBytes } from './term-table.js';

/** The term was in the document being read when its run was written. */
export const OPEN = 1;
/** The term was in the document its epoch started in the middle of. */
export const CONTINUED = 2;

const HEADER_BYTES = 17;
const BUFFER_BYTES = 1 << 20;
/** Read buffer of a run being merged (MAX_FAN_IN of them at most a task). */
const READ_BYTES = 1 << 18;
/** A run's sparse index holds the term and file position of every INDEX_EVERY-th record. */
const INDEX_EVERY = 4096;

/** Terms of a run at known file positions, in order: where a merge of a range of terms starts reading it. */
export interface RunIndex {
  keys: TermBytes;
  positions: Float64Array;
}

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
  index: RunIndex;
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

/** Writes a run's records in order, with its sparse index. */
class RunWriter {
  private readonly fd: number;
  private buf = takeBuffer(BUFFER_BYTES);
  private fill = 0;
  private written = 0;
  private records = 0;
  private keys = new Uint8Array(1024);
  private keyFill = 0;
  private readonly keyOffsets: number[] = [0];
  private readonly positions: number[] = [];

  constructor(private readonly file: string) {
    try {
      this.fd = openSync(file, 'w');
    } catch (e) {
      giveBuffer(this.buf);
      throw wrapWriteError(e, file);
    }
  }

  append(bytes: Uint8Array, start: number, end: number, flags: number, count: number, docFreq: number): void {
    const len = end - start;
    if (this.fill + HEADER_BYTES + len > this.buf.length) {
      this.flush();
      if (HEADER_BYTES + len > this.buf.length) {
        giveBuffer(this.buf);
        this.buf = takeBuffer(HEADER_BYTES + len);
      }
    }
    const { buf, fill } = this;
    if (this.records++ % INDEX_EVERY === 0) {
      if (this.keyFill + len > this.keys.length) {
        const keys = new Uint8Array(Math.max(2 * this.keys.length, this.keyFill + len));
        keys.set(this.keys.subarray(0, this.keyFill));
        this.keys = keys;
      }
      for (let k = 0; k < len; k++) this.keys[this.keyFill + k] = bytes[start + k];
      this.keyFill += len;
      this.keyOffsets.push(this.keyFill);
      this.positions.push(this.written + fill);
    }
    buf.writeUInt32LE(len, fill);
    buf[fill + 4] = flags;
    buf.writeDoubleLE(count, fill + 5);
    buf.writeUInt32LE(docFreq, fill + 13);
    for (let k = 0; k < len; k++) buf[fill + HEADER_BYTES + k] = bytes[start + k];
    this.fill = fill + HEADER_BYTES + len;
  }

  private flush(): void {
    writeBytesOrThrow(this.fd, this.buf, this.fill, this.file);
    this.written += this.fill;
    this.fill = 0;
  }

  /** Writes what is buffered and closes the file: its size and sparse index. */
  close(): { bytes: number; index: RunIndex } {
    try {
      this.flush();
    } finally {
      this.release();
    }
    const index = { keys: { arena: this.keys.slice(0, this.keyFill), offsets: Uint32Array.from(this.keyOffsets) }, positions: Float64Array.from(this.positions) };
    return { bytes: this.written, index };
  }

  /** Closes the file without writing more (after a failure). */
  release(): void {
    if (this.buf.length === 0) return;
    const buf = this.buf;
    this.buf = Buffer.alloc(0);
    giveBuffer(buf);
    closeSync(this.fd);
  }
}

/**
 * Writes one epoch's terms to `file` in the order of their bytes (`sorted`: the ids in that order, when known;
 * else sorted here, with `scratch` for the sort); returns the bytes written and the run's sparse index.
 */
export function writeTermRun(
  file: string, epoch: EpochTerms, sorted: Uint32Array | null = null, scratch: SortScratch | null = null,
): { bytes: number; index: RunIndex } {
  const { terms, size, counts, docFreqs, flags } = epoch;
  let order = sorted;
  if (order === null) {
    order = new Uint32Array(size);
    for (let i = 0; i < size; i++) order[i] = i;
    sortByBytes(terms.arena, terms.offsets, order, scratch);
  }
  const writer = new RunWriter(file);
  try {
    for (let i = 0; i < size; i++) {
      const id = order[i];
      writer.append(terms.arena, terms.offsets[id], terms.offsets[id + 1], flags === null ? 0 : flags[id], counts[id], docFreqs[id]);
    }
    return writer.close();
  } finally {
    writer.release();
  }
}

/** The terms of a range of one run file, read record by record through one buffer: the current term is bytes[start, end). */
class RunSource {
  bytes: Uint8Array;
  start = 0;
  end = 0;
  count = 0;
  docFreq = 0;
  flags = 0;
  /** Bytes of the range's records read so far (each record is in one range: the ranges' sum is the file's size). */
  consumed = 0;
  private buf: Buffer;
  private fill = 0;
  private pos = 0;
  private filePos: number;
  private readonly fd: number;
  /** Still before the range's first term. */
  private before: boolean;

  constructor(private readonly file: string, from: number, private readonly lo: Uint8Array | null, private readonly hi: Uint8Array | null) {
    this.filePos = from;
    this.before = lo !== null;
    this.buf = takeBuffer(READ_BYTES);
    this.bytes = this.buf;
    try {
      this.fd = openSync(file, 'r');
    } catch (e) {
      giveBuffer(this.buf);
      throw new Error(`${file}: cannot read a term run: ${(e as Error).message}`);
    }
  }

  /** Moves to the next term of the range; false past its end. */
  next(): boolean {
    for (;;) {
      if (!this.record()) return false;
      const { lo, hi } = this;
      if (this.before) {
        if (compareBytes(this.bytes, this.start, this.end, lo!, 0, lo!.length) < 0) continue;
        this.before = false;
      }
      if (hi !== null && compareBytes(this.bytes, this.start, this.end, hi, 0, hi.length) >= 0) return false;
      this.consumed += HEADER_BYTES + this.end - this.start;
      return true;
    }
  }

  /** Reads the next record; false at the end of the file. */
  private record(): boolean {
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
      const got = readSync(this.fd, this.buf, this.fill, this.buf.length - this.fill, this.filePos);
      if (got <= 0) return false;
      this.fill += got;
      this.filePos += got;
    }
    return true;
  }

  close(): void {
    closeSync(this.fd);
    giveBuffer(this.buf);
  }
}

/** Where reading `run` for terms from `lo` on starts: the position of its last indexed term before lo. */
function startOf(run: TermRun, lo: Uint8Array | null): number {
  if (lo === null) return 0;
  const { keys, positions } = run.index;
  let a = 0;
  let b = positions.length;
  // the first indexed term not before lo is b; the one before it (if any) is where to start
  while (a < b) {
    const m = (a + b) >>> 1;
    if (compareBytes(keys.arena, keys.offsets[m], keys.offsets[m + 1], lo, 0, lo.length) < 0) a = m + 1;
    else b = m;
  }
  return a === 0 ? 0 : positions[a - 1];
}

/**
 * Terms that cut the runs' terms into about `parts` ranges of equal numbers of terms, from the runs' sparse
 * indexes (every index term stands for INDEX_EVERY terms of its run): ranges [null, k1), [k1, k2), ... [kn, null).
 */
export function termRanges(runs: TermRun[], parts: number): { lo: Uint8Array | null; hi: Uint8Array | null }[] {
  const keys: Buffer[] = [];
  for (const r of runs) {
    const { arena, offsets } = r.index.keys;
    for (let k = 0; k + 1 < offsets.length; k++) keys.push(Buffer.from(arena.buffer, arena.byteOffset + offsets[k], offsets[k + 1] - offsets[k]));
  }
  keys.sort(Buffer.compare);
  const cuts: Uint8Array[] = [];
  for (let p = 1; p < parts; p++) {
    const key = keys[Math.floor((p * keys.length) / parts)];
    if (key !== undefined && (cuts.length === 0 || Buffer.compare(key, cuts[cuts.length - 1]) > 0)) cuts.push(new Uint8Array(key));
  }
  return [null, ...cuts].map((lo, i) => ({ lo, hi: cuts[i] ?? null }));
}

/** The kept terms of a merge, in byte order, with their sums. */
export interface KeptTerms {
  terms: TermBytes;
  counts: Float64Array;
  docFreqs: Uint32Array;
  /** Distinct terms of the corpus, kept or not. */
  distinct: number;
}

/** A merge task's setup: every run (in mapper, then epoch order) and the vocabulary's filters. */
export interface TermMergeSetup {
  runs: TermRun[];
  filter: KeptFilter;
}

/** A range of terms to merge: from lo (inclusive; null: the first) to hi (exclusive; null: past the last). */
export interface TermRange {
  lo: Uint8Array | null;
  hi: Uint8Array | null;
}

/** Consecutive runs of one mapper (or of mappers with one run each) to fold into one run at `file`. */
export interface FoldTask {
  runs: TermRun[];
  file: string;
}

/** Distinct terms merged between two progress reports. */
const PROGRESS_TERMS = 1 << 16;

/** The vocabulary filters the merge applies. */
export interface KeptFilter {
  minCount: number;
  minDocFreq: number;
  maxSize: number;
}

/**
 * The runs' terms from lo (inclusive; null: the first) to hi (exclusive; null: past the last) merged by their
 * bytes, equal terms summed (a document counted in two consecutive runs of one mapper counted once), keeping
 * only those with count ≥ minCount and document frequency ≥ minDocFreq (and with maxSize, at most twice that
 * many, the first by count). `runs` in mapper, then epoch order. onProgress hears bytes read as they are.
 */
export function mergeTermRange(
  runs: TermRun[], v: KeptFilter, lo: Uint8Array | null, hi: Uint8Array | null, onProgress: (bytes: number) => void = () => {},
): KeptTerms {
  const sources: RunSource[] = [];
  try {
    for (const run of runs) sources.push(new RunSource(run.file, startOf(run, lo), lo, hi));
    return mergeSources(runs, sources, v, reporter(sources, onProgress));
  } finally {
    for (const s of sources) s.close();
  }
}

/** A function that tells onProgress the bytes the sources read since it last did. */
function reporter(sources: RunSource[], onProgress: (bytes: number) => void): () => void {
  let reported = 0;
  return () => {
    const consumed = sources.reduce((sum, x) => sum + x.consumed, 0);
    onProgress(consumed - reported);
    reported = consumed;
  };
}

/** Kept terms of consecutive ranges, in order, as one list. */
export function concatKept(parts: KeptTerms[]): KeptTerms {
  let n = 0;
  let bytes = 0;
  let distinct = 0;
  for (const p of parts) {
    n += p.counts.length;
    bytes += p.terms.offsets[p.counts.length];
    distinct += p.distinct;
  }
  const arena = new Uint8Array(bytes);
  const offsets = new Uint32Array(n + 1);
  const counts = new Float64Array(n);
  const docFreqs = new Uint32Array(n);
  let at = 0;
  let fill = 0;
  for (const p of parts) {
    const m = p.counts.length;
    arena.set(p.terms.arena.subarray(0, p.terms.offsets[m]), fill);
    for (let i = 0; i < m; i++) offsets[at + i + 1] = fill + p.terms.offsets[i + 1];
    counts.set(p.counts, at);
    docFreqs.set(p.docFreqs, at);
    at += m;
    fill += p.terms.offsets[m];
  }
  return { terms: { arena, offsets }, counts, docFreqs, distinct };
}

/**
 * The terms of several runs' sources in byte order, each once with its sums: a binary heap of the sources by
 * current term, ties by index, so that equal terms come in the order of the runs (a mapper's in epoch order).
 * A document counted in two consecutive runs of one mapper (OPEN in the earlier, CONTINUED in the later, the
 * same document) is counted once.
 */
class SummedTerms {
  /** The current term: term[0, len), a copy (the sources move on while it is summed). */
  term = new Uint8Array(256);
  len = 0;
  count = 0;
  docFreq = 0;
  /** The first and last runs (indexes) that hold the term, and its flags there. */
  first = 0;
  firstFlags = 0;
  last = 0;
  lastFlags = 0;
  private readonly heap: number[] = [];

  constructor(private readonly runs: TermRun[], private readonly sources: RunSource[]) {
    for (let i = 0; i < sources.length; i++) if (sources[i].next()) this.heap.push(i);
    for (let i = (this.heap.length >> 1) - 1; i >= 0; i--) this.down(i);
  }

  private less(a: number, b: number): boolean {
    const x = this.sources[a];
    const y = this.sources[b];
    const c = compareBytes(x.bytes, x.start, x.end, y.bytes, y.start, y.end);
    return c < 0 || (c === 0 && a < b);
  }

  private down(at: number): void {
    const { heap } = this;
    for (;;) {
      const l = 2 * at + 1;
      if (l >= heap.length) return;
      const c = l + 1 < heap.length && this.less(heap[l + 1], heap[l]) ? l + 1 : l;
      if (!this.less(heap[c], heap[at])) return;
      const t = heap[c];
      heap[c] = heap[at];
      heap[at] = t;
      at = c;
    }
  }

  /** Moves to the next term; false after the last. */
  next(): boolean {
    const { heap, sources, runs } = this;
    if (heap.length === 0) return false;
    const head = sources[heap[0]];
    const len = head.end - head.start;
    if (len > this.term.length) this.term = new Uint8Array(Math.max(2 * this.term.length, len));
    const term = this.term;
    for (let k = 0; k < len; k++) term[k] = head.bytes[head.start + k];
    this.len = len;
    this.count = 0;
    this.docFreq = 0;
    this.first = heap[0];
    this.firstFlags = head.flags;
    let prev = -1;
    do {
      const top = heap[0];
      const s = sources[top];
      this.count += s.count;
      this.docFreq += s.docFreq;
      if (prev >= 0 && runs[prev].mapper === runs[top].mapper && (this.lastFlags & OPEN) !== 0 && (s.flags & CONTINUED) !== 0
        && runs[prev].openDoc === runs[top].continuedDoc) this.docFreq--;
      prev = top;
      this.last = top;
      this.lastFlags = s.flags;
      if (s.next()) this.down(0);
      else {
        heap[0] = heap[heap.length - 1];
        heap.pop();
        if (heap.length > 0) this.down(0);
      }
    } while (heap.length > 0 && compareBytes(sources[heap[0]].bytes, sources[heap[0]].start, sources[heap[0]].end, term, 0, len) === 0);
    return true;
  }
}

function mergeSources(runs: TermRun[], sources: RunSource[], { minCount, minDocFreq, maxSize }: KeptFilter, report: () => void): KeptTerms {
  const terms = new SummedTerms(runs, sources);
  let arena = new Uint8Array(1 << 16);
  let fill = 0;
  let cap = 1024;
  let offsets = new Uint32Array(cap + 1);
  let counts = new Float64Array(cap);
  let docFreqs = new Uint32Array(cap);
  let kept = 0;
  let distinct = 0;
  while (terms.next()) {
    if (++distinct % PROGRESS_TERMS === 0) report();
    const { count, docFreq, len } = terms;
    if (count < minCount || docFreq < minDocFreq) continue;
    if (maxSize > 0 && kept === 2 * maxSize) {
      kept = keepMost(maxSize, kept, arena, offsets, counts, docFreqs);
      fill = offsets[kept];
    }
    if (fill + len > arena.length) {
      let n = arena.length * 2;
      while (n < fill + len) n *= 2;
      const grown = new Uint8Array(n);
      grown.set(arena.subarray(0, fill));
      arena = grown;
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
    arena.set(terms.term.subarray(0, len), fill);
    counts[kept] = count;
    docFreqs[kept] = docFreq;
    fill += len;
    offsets[++kept] = fill;
  }
  report();
  // a range's terms past the first maxSize by count cannot be in the vocabulary either
  if (maxSize > 0 && kept > maxSize) {
    kept = keepMost(maxSize, kept, arena, offsets, counts, docFreqs);
    fill = offsets[kept];
  }
  // copies of their size: a thread hands them over whole
  return { terms: { arena: arena.slice(0, fill), offsets: offsets.slice(0, kept + 1) }, counts: counts.slice(0, kept), docFreqs: docFreqs.slice(0, kept), distinct };
}

/** Most runs a merge reads at once (open files and read buffers); more are folded first (foldRuns). */
export const MAX_FAN_IN = 64;

/**
 * Consecutive runs of one mapper (epoch order) merged into one run at `file`, nothing left out: sums as the final
 * merge makes them, a document counted in two of them counted once. The new run begins where the first began
 * and ends where the last ended: a term is CONTINUED when its first run has it so and began inside the same
 * document as the first run (the document spans the runs before), OPEN when its last run has it so and ended
 * inside the same document as the last run.
 */
export function foldRuns(runs: TermRun[], file: string, onProgress: (bytes: number) => void = () => {}): TermRun {
  const first = runs[0];
  const last = runs[runs.length - 1];
  const sources: RunSource[] = [];
  const writer = new RunWriter(file);
  try {
    for (const run of runs) sources.push(new RunSource(run.file, 0, null, null));
    const terms = new SummedTerms(runs, sources);
    const report = reporter(sources, onProgress);
    let n = 0;
    while (terms.next()) {
      let flags = 0;
      if ((terms.firstFlags & CONTINUED) !== 0 && runs[terms.first].continuedDoc === first.continuedDoc) flags |= CONTINUED;
      if ((terms.lastFlags & OPEN) !== 0 && runs[terms.last].openDoc === last.openDoc) flags |= OPEN;
      writer.append(terms.term, 0, terms.len, flags, terms.count, terms.docFreq);
      if (++n % PROGRESS_TERMS === 0) report();
    }
    const { bytes, index } = writer.close();
    report();
    return { file, mapper: first.mapper, epoch: first.epoch, continuedDoc: first.continuedDoc, openDoc: last.openDoc, bytes, index };
  } finally {
    writer.release();
    for (const x of sources) x.close();
  }
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
