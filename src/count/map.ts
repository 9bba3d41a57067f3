/**
 * The map tasks of the counting stage, run in a worker thread or in the main thread alike:
 * - vocabulary: term counts and document frequencies of splits, keyed by term bytes (independent of the final
 *   vocabulary, so partial counts of unchanged inputs stay reusable);
 * - pairs: co-occurrence weights of splits keyed by final term ids, in a bounded accumulator that spills.
 * A mapper keeps one accumulator across all the tasks it runs and hands it over once, at finish.
 */
import { rmSync, statSync } from 'node:fs';
import path from 'node:path';
import type { ContextsConfig, InputConfig, TokenizeConfig } from '../config/types.js';
import { readSplit, type DocumentSink, type InputSplit } from '../ingest/split.js';
import { emptyIngestStats, type IngestStats } from '../ingest/types.js';
import { createByteTokenizer, type ByteTokenizer, type TokenSink } from '../tokenize/bytes.js';
import { PairAccumulator, type AccumulatorHandover } from './pair-accumulator.js';
import { TermTable, type TermBytes } from './term-table.js';
import { windowWeights } from './cooccur.js';
import { DOCUMENT_END, TokenStreamWriter, readTokenStream, type TokenStreamRef } from './token-stream.js';

export interface ReadSetup {
  input: InputConfig;
  tokenize: TokenizeConfig;
  /** Folder relative paths of the config (stopword file) are resolved against. */
  baseDir: string;
}

/** The vocabulary pass's setup: reading, and where to write token streams (null: none). */
export interface VocabularySetup extends ReadSetup {
  streamDir: string | null;
  /** Tells this mapper's stream files apart from the others'. */
  mapper: number;
}

/** What one split's reading found; summed over splits in split order. */
export interface SplitResult {
  stats: IngestStats;
  /** The split's token stream, when the vocabulary pass wrote one. */
  stream?: TokenStreamRef;
}

export interface VocabularyPartial {
  terms: TermBytes;
  counts: Float64Array;
  docFreqs: Uint32Array;
  tokens: number;
}

/** Term counts and document frequencies by term bytes. */
export class VocabularyMapper {
  readonly table = new TermTable(1 << 14);
  private counts = new Float64Array(1 << 14);
  private docFreqs = new Uint32Array(1 << 14);
  private lastDoc = new Int32Array(1 << 14).fill(-1);
  private doc = -1;
  tokens = 0;
  private readonly sink: DocumentSink;
  /** The token stream of the split being read, or null. */
  private stream: TokenStreamWriter | null = null;
  private streams = 0;

  private constructor(private readonly setup: VocabularySetup, private readonly tokenizer: ByteTokenizer) {
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
    if (streamDir === null) {
      await readSplit(split, this.setup.input, stats, this.sink, onProgress);
      return { stats };
    }
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
    return { terms: this.table.toTermBytes(), counts: this.counts.slice(0, n), docFreqs: this.docFreqs.slice(0, n), tokens: this.tokens };
  }
}

export interface PairsSetup extends ReadSetup {
  /** The final vocabulary's terms in id order (for splits read from the input). */
  vocabulary: TermBytes;
  /**
   * For token streams: streamIds[m][i] is the final id (or -1) of term i of vocabulary mapper m; empty when the
   * tasks read the input.
   */
  streamIds: Int32Array[];
  contexts: ContextsConfig;
  nCols: number;
  denseSize: number;
  bandRows: number;
  /** Hash slots of the accumulator before it spills. */
  capacity: number;
  spillDir: string;
  /** Tells this mapper's spill files apart from the others'. */
  mapper: number;
}

/**
 * A split of pass 2 and the corpus-wide index of its first document (for document contexts); with `stream`,
 * the split's tokens are read from the token stream the vocabulary pass wrote instead of from the input.
 */
export interface PairsTask {
  split: InputSplit;
  firstDocument: number;
  stream?: TokenStreamRef;
}

export type PairsPartial = AccumulatorHandover & {
  pairs: number;
};

/** Co-occurrence weights of the documents of its splits. */
export class PairsMapper {
  /** The final vocabulary by bytes, built on the first task that reads the input (token streams need none). */
  private ids: TermTable | null = null;
  private readonly acc: PairAccumulator;
  private buf = new Int32Array(1 << 14);
  private len = 0;
  private doc = 0;
  private readonly sink: DocumentSink;
  private readonly weights: Float64Array;
  /** Ends the current document: adds its pairs and moves to the next document. */
  private readonly endDocument: () => void;

  private constructor(private readonly setup: PairsSetup, tokenizer: ByteTokenizer) {
    const ctx = setup.contexts;
    this.weights = windowWeights(ctx).weights;
    let runs = 0;
    this.acc = new PairAccumulator(
      { nRows: setup.vocabulary.offsets.length - 1, nCols: setup.nCols, denseSize: setup.denseSize, triangle: ctx.type === 'window' && ctx.direction === 'symmetric', capacity: setup.capacity, bandRows: setup.bandRows },
      () => path.join(setup.spillDir, `m${String(setup.mapper).padStart(3, '0')}-run-${String(runs++).padStart(5, '0')}.bin`),
    );
    const push: TokenSink = (bytes, start, end, hash) => {
      const ids = this.ids ?? (this.ids = TermTable.fromTermBytes(setup.vocabulary));
      if (this.len === this.buf.length) this.growBuffer();
      this.buf[this.len++] = ids.findHashed(bytes, start, end, hash);
    };
    const done = (): void => {
      if (ctx.type === 'document') this.acc.addDocument(this.buf, this.len, this.doc);
      else this.acc.addWindowed(this.buf, this.len, ctx.window, this.weights, ctx.direction);
      this.doc++;
      this.len = 0;
    };
    this.endDocument = done;
    this.sink = {
      bytes: (b, s, e) => {
        tokenizer.tokenizeAscii(b, s, e, push);
        done();
      },
      text: (t) => {
        tokenizer.tokenizeText(t, push);
        done();
      },
    };
  }

  static async create(setup: PairsSetup): Promise<PairsMapper> {
    return new PairsMapper(setup, await createByteTokenizer(setup.tokenize, setup.baseDir));
  }

  async run(task: PairsTask, onProgress: (bytes: number) => void): Promise<SplitResult> {
    this.doc = task.firstDocument;
    const stats = emptyIngestStats();
    if (task.stream !== undefined) {
      this.runStream(task.stream, task.split.end - task.split.start, onProgress);
      return { stats };
    }
    await readSplit(task.split, this.setup.input, stats, this.sink, onProgress);
    return { stats };
  }

  /** Doubles the document's id buffer, keeping its ids. */
  private growBuffer(): Int32Array {
    const bigger = new Int32Array(this.buf.length * 2);
    bigger.set(this.buf);
    return (this.buf = bigger);
  }

  /** The split's documents from its token stream, ids translated to the final vocabulary's. */
  private runStream(stream: TokenStreamRef, splitBytes: number, onProgress: (bytes: number) => void): void {
    const toFinal = this.setup.streamIds[stream.mapper];
    const size = Math.max(1, statSync(stream.file).size);
    let reported = 0;
    let read = 0;
    readTokenStream(stream.file, (ids, n, bytes) => {
      let buf: Int32Array = this.buf;
      let len = this.len;
      for (let i = 0; i < n; i++) {
        const id = ids[i];
        if (id === DOCUMENT_END) {
          this.len = len;
          this.endDocument();
          len = 0;
          continue;
        }
        if (len === buf.length) buf = this.growBuffer();
        buf[len++] = toFinal[id];
      }
      this.len = len;
      // progress in input bytes, in proportion to the stream read so far
      read += bytes;
      const now = Math.floor((splitBytes * read) / size);
      onProgress(now - reported);
      reported = now;
    });
    if (reported < splitBytes) onProgress(splitBytes - reported);
    // read once: gone at once, so the streams' disk is free before the spilled runs reach their peak
    rmSync(stream.file, { force: true });
  }

  finish(): PairsPartial {
    return { ...this.acc.finish(), pairs: this.acc.pairs };
  }
}

/** The typed arrays of a partial, for a zero-copy hand-over between threads. */
export function transferablesOf(partial: VocabularyPartial | PairsPartial): ArrayBuffer[] {
  const arrays = 'terms' in partial
    ? [partial.terms.arena, partial.terms.offsets, partial.counts, partial.docFreqs]
    : [partial.dense, partial.rowStart, partial.cols, partial.values];
  // shared memory (the accumulator's handover) is shared by postMessage itself, not transferred
  return arrays.map((a) => a.buffer).filter((b, i, all): b is ArrayBuffer => b instanceof ArrayBuffer && b.byteLength > 0 && all.indexOf(b) === i);
}
