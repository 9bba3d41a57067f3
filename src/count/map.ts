/**
 * The vocabulary pass's map task, run in a worker thread or in the main thread alike: term counts and document
 * frequencies of splits, keyed by term bytes (independent of the final vocabulary), and each split's tokens
 * written as a token stream of the mapper's term ids for the count stage. A mapper keeps one term table across
 * all the tasks it runs and hands it over once, at finish.
 */
import path from 'node:path';
import type { InputConfig, TokenizeConfig } from '../config/types.js';
import { readSplit, type DocumentSink, type InputSplit } from '../ingest/split.js';
import { emptyIngestStats, type IngestStats } from '../ingest/types.js';
import { createByteTokenizer, type ByteTokenizer, type TokenSink } from '../tokenize/bytes.js';
import { TermTable, sortByBytes, type TermBytes } from './term-table.js';
import { DOCUMENT_END, TokenStreamWriter, type TokenStreamRef } from './token-stream.js';
import { CONTINUED, OPEN, writeTermRun, type TermRun } from './term-runs.js';

export interface ReadSetup {
  input: InputConfig;
  tokenize: TokenizeConfig;
  /** Folder relative paths of the config (stopword file) are resolved against. */
  baseDir: string;
}

/** The vocabulary pass's setup: reading, and where to write token streams. */
export interface VocabularySetup extends ReadSetup {
  streamDir: string;
  /** Tells this mapper's stream files apart from the others'. */
  mapper: number;
  /** Most terms (a power of two) and most term bytes of the mapper's table before it is written to a run. */
  termLimit: number;
  arenaLimit: number;
}

/** What one split's reading found; summed over splits in split order. */
export interface SplitResult {
  stats: IngestStats;
  /** The split's token stream. */
  stream: TokenStreamRef;
}

export interface VocabularyPartial {
  terms: TermBytes;
  /** The mapper's term ids in the order of their bytes (sortByBytes), for merging the mappers' terms. */
  order: Uint32Array;
  counts: Float64Array;
  docFreqs: Uint32Array;
  tokens: number;
  /** The runs the mapper wrote when its table filled (then the arrays above are empty), in epoch order. */
  runs: TermRun[];
}

/** Terms a mapper's tables hold before they first grow. */
const INITIAL_TERMS = 256;
/** The most documents a mapper numbers before it numbers them from 0 again (its last documents are int32). */
const MAX_LOCAL_DOC = 0x7ffffffe;

/** Term counts and document frequencies by term bytes. */
export class VocabularyMapper {
  // small at first: the tables grow while the first documents are read, before the hot loop is compiled, so
  // the compiled loop knows the growing paths and is not thrown back to the interpreter when they run later
  readonly table = new TermTable(INITIAL_TERMS);
  private counts = new Float64Array(INITIAL_TERMS);
  private docFreqs = new Uint32Array(INITIAL_TERMS);
  private lastDoc = new Int32Array(INITIAL_TERMS).fill(-1);
  /** OPEN and CONTINUED bits of the terms (term-runs.ts), once the table has been written out (spilled) once. */
  private flags: Uint8Array | null = null;
  /** The current document's number in this epoch; docBase + doc numbers it over all the mapper's documents. */
  private doc = -1;
  private docBase = 0;
  /** The epoch began inside a document (number docBase) whose terms are not yet marked CONTINUED. */
  private continuing = false;
  private continuedDoc = -1;
  tokens = 0;
  private readonly sink: DocumentSink;
  /** The token stream of the split being read, or null. */
  private stream: TokenStreamWriter | null = null;
  private streams = 0;
  /** The runs written when the table filled; once there is one, the mapper writes no token stream. */
  private readonly runs: TermRun[] = [];

  private constructor(private readonly setup: VocabularySetup, tokenizer: ByteTokenizer) {
    this.table.limit = setup.termLimit;
    this.table.arenaLimit = setup.arenaLimit;
    const add: TokenSink = (bytes, start, end, hash) => {
      let id = this.table.internHashed(bytes, start, end, hash);
      if (id < 0) id = this.spill(bytes, start, end, hash);
      if (id === this.counts.length) this.grow();
      this.counts[id]++;
      if (this.lastDoc[id] !== this.doc) {
        this.lastDoc[id] = this.doc;
        this.docFreqs[id]++;
      }
      this.tokens++;
      if (this.stream !== null) this.stream.push(id);
    };
    this.sink = {
      bytes: (b, s, e) => {
        if (this.continuing || this.doc === MAX_LOCAL_DOC) this.documentBoundary();
        this.doc++;
        tokenizer.tokenizeAscii(b, s, e, add);
        if (this.stream !== null) this.stream.push(DOCUMENT_END);
      },
      text: (t) => {
        if (this.continuing || this.doc === MAX_LOCAL_DOC) this.documentBoundary();
        this.doc++;
        tokenizer.tokenizeText(t, add);
        if (this.stream !== null) this.stream.push(DOCUMENT_END);
      },
    };
  }

  static async create(setup: VocabularySetup): Promise<VocabularyMapper> {
    return new VocabularyMapper(setup, await createByteTokenizer(setup.tokenize, setup.baseDir));
  }

  private grow(): void {
    const n = this.counts.length * 2;
    const counts = new Float64Array(n);
    counts.set(this.counts);
    const docFreqs = new Uint32Array(n);
    docFreqs.set(this.docFreqs);
    const lastDoc = new Int32Array(n).fill(-1);
    lastDoc.set(this.lastDoc);
    this.counts = counts;
    this.docFreqs = docFreqs;
    this.lastDoc = lastDoc;
    if (this.flags !== null) {
      const flags = new Uint8Array(n);
      flags.set(this.flags);
      this.flags = flags;
    }
  }

  /** Before a document starts: the continued document has ended; document numbers start again before int32 ends. */
  private documentBoundary(): void {
    if (this.continuing) this.markContinued();
    if (this.doc === MAX_LOCAL_DOC) {
      this.docBase += this.doc + 1;
      this.doc = -1;
      this.lastDoc.fill(-1);
    }
  }

  /** The terms met so far in the document this epoch began inside (number 0 of the epoch) are CONTINUED. */
  private markContinued(): void {
    const { lastDoc, flags } = this;
    for (let id = 0; id < this.table.size; id++) if (lastDoc[id] === 0) flags![id] |= CONTINUED;
    this.continuing = false;
  }

  /**
   * The table is full: its terms are written to a run and it starts empty, inside the current document, which
   * keeps its number (docBase moves to it). The token streams stop: their ids would mean other terms now.
   * Returns the id of the term that did not fit, inserted into the empty table.
   */
  private spill(bytes: Uint8Array, start: number, end: number, hash: number): number {
    this.writeRun(this.docBase + this.doc);
    this.docBase += this.doc;
    this.doc = 0;
    this.continuing = true;
    this.continuedDoc = this.docBase;
    if (this.stream !== null) {
      this.stream.discard();
      this.stream = null;
    }
    const id = this.table.internHashed(bytes, start, end, hash);
    if (id < 0) throw new Error(`a term of ${end - start} bytes does not fit an empty term table`);
    return id;
  }

  /** Writes the table's terms as the mapper's next run (openDoc: the document being read, or -1) and empties it. */
  private writeRun(openDoc: number): void {
    const size = this.table.size;
    if (this.flags === null) this.flags = new Uint8Array(this.counts.length);
    const { flags, lastDoc } = this;
    if (this.continuing) this.markContinued();
    if (openDoc >= 0) for (let id = 0; id < size; id++) if (lastDoc[id] === this.doc) flags[id] |= OPEN;
    const epoch = this.runs.length;
    const { streamDir, mapper } = this.setup;
    const file = path.join(streamDir, `m${String(mapper).padStart(3, '0')}-terms-${String(epoch).padStart(6, '0')}.run`);
    // sorted in the table's own hash slots, which clear() resets next
    const epochTerms = { terms: { arena: this.table.arena, offsets: this.table.starts }, size, counts: this.counts, docFreqs: this.docFreqs, flags };
    const { bytes, index } = writeTermRun(file, epochTerms, null, this.table.sortScratch());
    this.runs.push({ file, mapper, epoch, continuedDoc: this.continuedDoc, openDoc, bytes, index });
    this.table.clear();
    this.counts.fill(0);
    this.docFreqs.fill(0);
    this.lastDoc.fill(-1);
    flags.fill(0);
    this.continuedDoc = -1;
  }

  async run(split: InputSplit, onProgress: (bytes: number) => void): Promise<SplitResult> {
    const stats = emptyIngestStats();
    const { streamDir, mapper } = this.setup;
    const file = path.join(streamDir, `m${String(mapper).padStart(3, '0')}-${String(this.streams++).padStart(6, '0')}.ids`);
    // once a run is written, no stream: its ids would not be the earlier splits' (spill discards the open one)
    this.stream = this.runs.length === 0 ? new TokenStreamWriter(file) : null;
    try {
      await readSplit(split, this.setup.input, stats, this.sink, onProgress);
    } catch (e) {
      this.stream?.discard();
      this.stream = null;
      throw e;
    }
    const written = this.stream;
    this.stream = null;
    written?.close();
    return { stats, stream: { file, mapper } };
  }

  finish(): VocabularyPartial {
    if (this.runs.length > 0) {
      // a mapper that spilled hands over its last table as a run too: the calling thread merges runs
      this.writeRun(-1);
      const empty = { arena: new Uint8Array(0), offsets: new Uint32Array(1) };
      return { terms: empty, order: new Uint32Array(0), counts: new Float64Array(0), docFreqs: new Uint32Array(0), tokens: this.tokens, runs: this.runs };
    }
    const n = this.table.size;
    // the table's own arrays, not copies (the mapper is done with them; a thread hands their buffers over whole)
    const terms = { arena: this.table.arena.subarray(0, this.table.arenaFill), offsets: this.table.starts.subarray(0, n + 1) };
    // sorted here, on each mapper's thread at once, so that the calling thread merges sorted lists; in the
    // table's hash slots, which are not needed any more
    const order = new Uint32Array(n);
    for (let i = 0; i < n; i++) order[i] = i;
    sortByBytes(terms.arena, terms.offsets, order, this.table.sortScratch());
    return { terms, order, counts: this.counts.subarray(0, n), docFreqs: this.docFreqs.subarray(0, n), tokens: this.tokens, runs: [] };
  }
}

/** The token-stream pass's setup: reading, where to write, and the vocabulary whose ids the streams hold. */
export interface TokenSetup extends ReadSetup {
  streamDir: string;
  mapper: number;
  /** The vocabulary's terms in id order. */
  vocabulary: TermBytes;
}

/**
 * Token streams of a known vocabulary: each split's tokens written as vocabulary ids (the vocabulary's size for
 * a term not in it), looked up in one table of the vocabulary's terms, so memory does not grow with the
 * corpus's distinct terms. Used when the vocabulary pass wrote none (a term table filled) and when a count stage
 * reruns on a kept vocabulary.
 */
export class TokenMapper {
  private readonly sink: DocumentSink;
  private stream: TokenStreamWriter | null = null;
  private streams = 0;

  private constructor(private readonly setup: TokenSetup, tokenizer: ByteTokenizer) {
    const table = TermTable.fromTermBytes(setup.vocabulary);
    const absent = table.size;
    const add: TokenSink = (bytes, start, end, hash) => {
      const id = table.findHashed(bytes, start, end, hash);
      this.stream!.push(id < 0 ? absent : id);
    };
    this.sink = {
      bytes: (b, s, e) => {
        tokenizer.tokenizeAscii(b, s, e, add);
        this.stream!.push(DOCUMENT_END);
      },
      text: (t) => {
        tokenizer.tokenizeText(t, add);
        this.stream!.push(DOCUMENT_END);
      },
    };
  }

  static async create(setup: TokenSetup): Promise<TokenMapper> {
    return new TokenMapper(setup, await createByteTokenizer(setup.tokenize, setup.baseDir));
  }

  async run(split: InputSplit, onProgress: (bytes: number) => void): Promise<TokenStreamRef> {
    const { streamDir, mapper } = this.setup;
    const file = path.join(streamDir, `v${String(mapper).padStart(3, '0')}-${String(this.streams++).padStart(6, '0')}.ids`);
    const stream = new TokenStreamWriter(file);
    this.stream = stream;
    try {
      await readSplit(split, this.setup.input, emptyIngestStats(), this.sink, onProgress);
    } catch (e) {
      stream.discard();
      throw e;
    } finally {
      this.stream = null;
    }
    stream.close();
    return { file, mapper };
  }

  finish(): Record<string, never> {
    return {};
  }
}

/** The typed arrays of a partial, for a zero-copy hand-over between threads. */
export function transferablesOf(partial: VocabularyPartial): ArrayBuffer[] {
  const arrays = [partial.terms.arena, partial.terms.offsets, partial.order, partial.counts, partial.docFreqs];
  return arrays.map((a) => a.buffer).filter((b, i, all): b is ArrayBuffer => b instanceof ArrayBuffer && b.byteLength > 0 && all.indexOf(b) === i);
}
