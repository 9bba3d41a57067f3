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
}

/** Terms a mapper's tables hold before they first grow. */
const INITIAL_TERMS = 256;

/** Term counts and document frequencies by term bytes. */
export class VocabularyMapper {
  // small at first: the tables grow while the first documents are read, before the hot loop is compiled, so
  // the compiled loop knows the growing paths and is not thrown back to the interpreter when they run later
  readonly table = new TermTable(INITIAL_TERMS);
  private counts = new Float64Array(INITIAL_TERMS);
  private docFreqs = new Uint32Array(INITIAL_TERMS);
  private lastDoc = new Int32Array(INITIAL_TERMS).fill(-1);
  private doc = -1;
  tokens = 0;
  private readonly sink: DocumentSink;
  /** The token stream of the split being read, or null. */
  private stream: TokenStreamWriter | null = null;
  private streams = 0;

  private constructor(private readonly setup: VocabularySetup, tokenizer: ByteTokenizer) {
    const add: TokenSink = (bytes, start, end, hash) => {
      const id = this.table.internHashed(bytes, start, end, hash);
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
        this.doc++;
        tokenizer.tokenizeAscii(b, s, e, add);
        if (this.stream !== null) this.stream.push(DOCUMENT_END);
      },
      text: (t) => {
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
  }

  async run(split: InputSplit, onProgress: (bytes: number) => void): Promise<SplitResult> {
    const stats = emptyIngestStats();
    const { streamDir, mapper } = this.setup;
    const file = path.join(streamDir, `m${String(mapper).padStart(3, '0')}-${String(this.streams++).padStart(6, '0')}.ids`);
    this.stream = new TokenStreamWriter(file);
    try {
      await readSplit(split, this.setup.input, stats, this.sink, onProgress);
      this.stream.close();
    } finally {
      this.stream = null;
    }
    return { stats, stream: { file, mapper } };
  }

  finish(): VocabularyPartial {
    const n = this.table.size;
    const terms = this.table.toTermBytes();
    // sorted here, on each mapper's thread at once, so that the calling thread merges sorted lists
    const order = new Uint32Array(n);
    for (let i = 0; i < n; i++) order[i] = i;
    sortByBytes(terms.arena, terms.offsets, order);
    return { terms, order, counts: this.counts.slice(0, n), docFreqs: this.docFreqs.slice(0, n), tokens: this.tokens };
  }
}

/** The typed arrays of a partial, for a zero-copy hand-over between threads. */
export function transferablesOf(partial: VocabularyPartial): ArrayBuffer[] {
  const arrays = [partial.terms.arena, partial.terms.offsets, partial.order, partial.counts, partial.docFreqs];
  return arrays.map((a) => a.buffer).filter((b, i, all): b is ArrayBuffer => b instanceof ArrayBuffer && b.byteLength > 0 && all.indexOf(b) === i);
}
