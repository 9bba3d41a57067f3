/**
 * The count stage's view of the corpus: the token streams of all splits, in split order, form one stream of
 * final term ids. It is counted in chunks of at most a budgeted number of tokens. A chunk is loaded into
 * shared memory with the tokens either side that its windows reach, between two DOCUMENT_END sentinels, and
 * its terms counted, so that the count tasks know how many occurrences each row has (src/count/rows-map.ts
 * gathers them). Memory: at most 4 bytes a token of the chunk, whatever the corpus size.
 *
 * Loading runs in slices, on the threads (src/count/chunk-map.ts): each slice is read, mapped to final ids and
 * its terms and document ends counted (fillSlice).
 */
import { closeSync, openSync, readSync, statSync } from 'node:fs';
import { giveBuffer, takeBuffer } from '../store/buffer-pool.js';
import { DOCUMENT_END, type TokenStreamRef } from './token-stream.js';

/** The token streams of the splits, in corpus order, and per vocabulary mapper its term ids' final ids (-1: none). */
export interface CorpusStreams {
  refs: TokenStreamRef[];
  /** In shared memory, so that handing them to a thread does not copy them. */
  finalIds: Int32Array[];
}

/**
 * A chunk's ids: int32 (out of the vocabulary −1, document end DOCUMENT_END), or, for a vocabulary of fewer
 * than 65,534 terms, uint16 (half the memory to touch and to read), the two codes then 0xFFFE and 0xFFFF.
 * Either way an entry is a term id exactly when `(id >>> 0) < nRows`.
 */
export type ChunkIds = Int32Array | Uint16Array;

/** The code of a document end in a chunk's ids. */
export function documentEndIn(ids: ChunkIds): number {
  return ids instanceof Uint16Array ? NARROW_DOCUMENT_END : DOCUMENT_END;
}

const NARROW_OUT = 0xfffe;
const NARROW_DOCUMENT_END = 0xffff;
/** Most terms whose ids fit the narrow codes. */
const NARROW_MAX_ROWS = NARROW_OUT;

/** Whether a chunk's ids over nRows terms take 2 bytes (see ChunkIds). */
export function narrowIds(nRows: number): boolean {
  return nRows <= NARROW_MAX_ROWS;
}

/** A loaded chunk, in shared memory (the typed arrays' buffers are SharedArrayBuffers). */
export interface Chunk {
  /**
   * Final ids of the stream entries [lo, hi): the chunk's own [from, to) and the margins, with document-end
   * sentinels at both ends, as many as a window reaches (at least one), so that no window reads past the array.
   */
  ids: ChunkIds;
  /** Index into ids of the chunk's first own token and one past its last. */
  ownStart: number;
  ownEnd: number;
  /** Occurrences among the own tokens of the terms before t: term t has rowStart[t + 1] - rowStart[t]. */
  rowStart: Int32Array;
  /** DOCUMENT_END markers among the own tokens. */
  documentEnds: number;
  /** Corpus-wide index of the document the chunk's first own token belongs to. */
  firstDocument: number;
}

/** Where a chunk's entries come from: stream entries [lo, hi) go to ids[pad ..]. */
export interface ChunkSource {
  streams: CorpusStreams;
  lengths: number[];
  lo: number;
  /** Sentinels at each end of ids. */
  pad: number;
  ids: ChunkIds;
  ownStart: number;
  ownEnd: number;
  nRows: number;
}

/** One slice of a chunk's ids, [start, end) as indexes into ids. */
export interface ChunkSlice {
  start: number;
  end: number;
}

/** A slice's term counts among the own tokens, and its document ends. */
export interface SliceCounts {
  counts: Int32Array;
  ends: number;
}

/** Stream entries (tokens and document ends) of each token stream file. */
export function streamLengths(streams: CorpusStreams): number[] {
  return streams.refs.map((r) => statSync(r.file).size / 4);
}

/** Cuts [0, total) into chunks of at most `chunkTokens` stream entries. */
export function planChunks(total: number, chunkTokens: number): { from: number; to: number }[] {
  const n = Math.max(1, Math.ceil(total / Math.max(1, chunkTokens)));
  const out: { from: number; to: number }[] = [];
  for (let i = 0; i < n; i++) out.push({ from: Math.floor((total * i) / n), to: Math.floor((total * (i + 1)) / n) });
  return out;
}

export function sharedInt32(n: number): Int32Array {
  return new Int32Array(new SharedArrayBuffer(4 * Math.max(1, n)));
}

/**
 * Shared memory for the chunks of one count, allocated once for the largest and reused by every chunk: fresh
 * memory is slow to touch, and a chunk's own would only be freed once every thread had let go of it.
 */
export class ChunkMemory {
  private readonly ids: SharedArrayBuffer;
  private readonly rowStart: SharedArrayBuffer;
  private readonly gather: SharedArrayBuffer;
  /** Whether ids are uint16 (see ChunkIds). */
  readonly narrow: boolean;

  /**
   * For chunks of at most `maxOwn` own entries and `margin` either side, over nRows terms (`wide`: int32 ids
   * whatever nRows), with a gathering buffer of `gatherBytes` (gather.ts).
   */
  constructor(maxOwn: number, margin: number, readonly nRows: number, wide = false, gatherBytes = 1 << 20) {
    this.narrow = !wide && narrowIds(nRows);
    this.ids = new SharedArrayBuffer((this.narrow ? 2 : 4) * (maxOwn + 2 * margin + 2 * sentinels(margin)));
    this.rowStart = new SharedArrayBuffer(4 * (nRows + 1));
    this.gather = new SharedArrayBuffer(4 * Math.ceil(gatherBytes / 4));
  }

  /** The chunk's ids and the gathering buffer, the memory a count touches most. */
  bulk(): SharedArrayBuffer[] {
    return [this.ids, this.gather];
  }

  /** The gathering buffer: entries like the ids for windows, int32 for document numbers. */
  gatheredOf(documents: boolean): ChunkIds {
    return this.narrow && !documents ? new Uint16Array(this.gather) : new Int32Array(this.gather);
  }

  idsOf(n: number): ChunkIds {
    return this.narrow ? new Uint16Array(this.ids, 0, n) : new Int32Array(this.ids, 0, n);
  }

  /** The term offsets, zeroed. */
  rowStartOf(): Int32Array {
    return new Int32Array(this.rowStart).fill(0);
  }
}

/**
 * The shared ids array of the chunk owning stream entries [from, to), with `margin` entries either side as far
 * as the corpus goes; entries are filled in by fillSlice.
 */
export function chunkSource(streams: CorpusStreams, lengths: number[], from: number, to: number, margin: number, memory: ChunkMemory): ChunkSource {
  const total = lengths.reduce((s, n) => s + n, 0);
  const lo = Math.max(0, from - margin);
  const hi = Math.min(total, to + margin);
  const nRows = memory.nRows;
  const pad = sentinels(margin);
  const ids = memory.idsOf(hi - lo + 2 * pad);
  ids.fill(documentEndIn(ids), 0, pad);
  ids.fill(documentEndIn(ids), hi - lo + pad);
  return { streams, lengths, lo, pad, ids, ownStart: pad + from - lo, ownEnd: pad + to - lo, nRows };
}

/** Document-end sentinels at each end of a chunk whose windows reach `margin` entries either side. */
function sentinels(margin: number): number {
  return Math.max(1, margin);
}

/** The chunk's entries between its sentinels cut into `n` slices. */
export function planSlices(source: ChunkSource, n: number): ChunkSlice[] {
  const { pad } = source;
  const len = source.ids.length - 2 * pad;
  return Array.from({ length: n }, (_, i) => ({ start: pad + Math.floor((len * i) / n), end: pad + Math.floor((len * (i + 1)) / n) }));
}

/** Stream entries read at a time into the int32 staging buffer. */
const STAGE_ENTRIES = 1 << 16;

/** Reads a slice's stream entries into the chunk as final ids; counts its own tokens by term and its document ends. */
export function fillSlice(source: ChunkSource, slice: ChunkSlice): SliceCounts {
  const { streams, lengths, ids } = source;
  let from = source.lo + slice.start - source.pad;
  const to = source.lo + slice.end - source.pad;
  let at = slice.start;
  let fileStart = 0;
  // the streams' int32 ids are read through one staging buffer and written to the chunk as final ids (coded
  // for narrow chunks)
  const narrow = ids instanceof Uint16Array;
  const stage = takeBuffer(4 * STAGE_ENTRIES);
  const staged = new Int32Array(stage.buffer, stage.byteOffset, STAGE_ENTRIES);
  try {
    for (let f = 0; f < lengths.length && from < to; f++) {
      const fileEnd = fileStart + lengths[f];
      if (from < fileEnd) {
        const n = Math.min(to, fileEnd) - from;
        const { file, mapper } = streams.refs[f];
        const toFinal = streams.finalIds[mapper];
        const fd = openSync(file, 'r');
        try {
          for (let done = 0; done < n;) {
            const step = Math.min(n - done, STAGE_ENTRIES);
            readFully(fd, file, stage, 4 * step, 4 * (from - fileStart + done));
            mapIds(staged, step, toFinal, ids, at + done, narrow);
            done += step;
          }
        } finally {
          closeSync(fd);
        }
        at += n;
        from += n;
      }
      fileStart = fileEnd;
    }
  } finally {
    giveBuffer(stage);
  }
  const counts = new Int32Array(source.nRows);
  const ends = countIds(ids, Math.max(slice.start, source.ownStart), Math.min(slice.end, source.ownEnd), counts);
  return { counts, ends };
}

// The two loops of fillSlice are functions of their own, so that the code around them, compiled while they
// run, is not compiled before it ran (which would send it back to the interpreter when it first does).

/** Writes n stream ids as final ids (coded for narrow chunks) at ids[at ..]. */
function mapIds(staged: Int32Array, n: number, toFinal: Int32Array, ids: ChunkIds, at: number, narrow: boolean): void {
  for (let i = 0; i < n; i++) {
    const id = staged[i];
    const final = id >= 0 ? toFinal[id] : id;
    ids[at + i] = final >= 0 || !narrow ? final : final === DOCUMENT_END ? NARROW_DOCUMENT_END : NARROW_OUT;
  }
}

/** Counts ids[start, end) by term into counts (as many terms as it has entries); returns the document ends among them. */
function countIds(ids: ChunkIds, start: number, end: number, counts: Int32Array): number {
  const nRows = counts.length;
  const documentEnd = documentEndIn(ids);
  let ends = 0;
  for (let p = start; p < end; p++) {
    const id = ids[p];
    if (id >>> 0 < nRows) counts[id]++;
    else if (id === documentEnd) ends++;
  }
  return ends;
}

/** Reads exactly `length` bytes at `position` of an open token stream. */
function readFully(fd: number, file: string, bytes: Buffer, length: number, position: number): void {
  let done = 0;
  while (done < length) {
    const got = readSync(fd, bytes, done, length - done, position + done);
    if (got <= 0) throw new Error(`${file}: token stream ends early (${done} of ${length} bytes read)`);
    done += got;
  }
}

/** The chunk from its source and its slices' counts (in corpus order). */
export function chunkOf(source: ChunkSource, counted: SliceCounts[], memory: ChunkMemory, firstDocument: number): Chunk {
  const nRows = memory.nRows;
  const rowStart = memory.rowStartOf();
  let documentEnds = 0;
  for (const c of counted) {
    for (let t = 0; t < nRows; t++) rowStart[t + 1] += c.counts[t];
    documentEnds += c.ends;
  }
  for (let t = 0; t < nRows; t++) rowStart[t + 1] += rowStart[t];
  return { ids: source.ids, ownStart: source.ownStart, ownEnd: source.ownEnd, rowStart, documentEnds, firstDocument };
}
