import { promises as fsp, rmSync } from 'node:fs';
import path from 'node:path';
import type { KindredConfig } from '../config/types.js';
import { planSplits, readSplit, type InputSplit } from '../ingest/split.js';
import { emptyIngestStats, type IngestStats } from '../ingest/types.js';
import { runMap } from '../exec/pool.js';
import type { Progress } from '../progress.js';
import type { Marginals } from '../weight/types.js';
import { ShardWriter, partFileName } from '../store/shards.js';
import type { Vocabulary } from '../store/vocab-file.js';
import { planAccumulators, windowWeights } from './cooccur.js';
import {
  RowsSource, DenseSource, RunReader, mergeSources, type SortedSource,
  MAX_ROW_WISE_COLUMNS,
} from './runs.js';
import type { MergeTask } from './merge-map.js';
import { TermTable, compareBytes, type TermBytes } from './term-table.js';
import type { RowRange } from './partition.js';
import type { TokenStreamRef } from './token-stream.js';
import type { PairsTask } from './map.js';

/** How the counting passes run: where relative config paths start, and how many worker threads to use. */
export interface CountExec {
  baseDir: string;
  workers: number;
}

/** Pass 1's result: the vocabulary, corpus sizes, and the splits pass 2 reads again. */
export interface TermsResult {
  vocab: Vocabulary;
  /** tokens: all tokens read; size: distinct terms before the vocabulary filters. */
  counter: { tokens: number; size: number };
  /** The input splits pass 1 read (pass 2 reads the same ones). */
  splits: InputSplit[];
  /** Documents of each split, for corpus-wide document numbers in pass 2. */
  splitDocuments: number[];
  threads: number;
  /** The token streams pass 1 wrote (one per split) and, per mapper, its term ids' final ids; null if none. */
  streams: { refs: TokenStreamRef[]; finalIds: Int32Array[] } | null;
}

/** Bytes per split: a few splits per worker so threads stay busy, none too small to be worth a task. */
function splitBytes(totalBytes: number, workers: number): number {
  return Math.max(1 << 20, Math.ceil(totalBytes / (workers * 4)));
}

function addStats(into: IngestStats, from: IngestStats): void {
  into.files += from.files;
  into.bytes += from.bytes;
  into.documents += from.documents;
  into.invalidUtf8Replaced += from.invalidUtf8Replaced;
  into.badRecordsSkipped += from.badRecordsSkipped;
  into.binaryFilesSkipped += from.binaryFilesSkipped;
}

/**
 * Pass 1: term counts and document frequencies over the whole corpus, on worker threads. With a streamDir,
 * each split's tokens are also written there as token streams, which pass 2 then reads instead of the input.
 */
export async function countTerms(
  files: string[], cfg: KindredConfig, exec: CountExec, stats: IngestStats, progress: Progress, totalBytes: number,
  streamDir: string | null = null,
): Promise<TermsResult> {
  const splits = planSplits(files, cfg.input, splitBytes(totalBytes, exec.workers));
  progress.start('vocabulary', totalBytes, 'B');
  let done = 0;
  const run = await runMap('vocabulary', (mapper) => ({ input: cfg.input, tokenize: cfg.tokenize, baseDir: exec.baseDir, streamDir, mapper }), splits, exec.workers, (n) => progress.update((done += n)));
  for (const r of run.results) addStats(stats, r.stats);

  // Merge the partial counts by term bytes; the result does not depend on which thread read which split.
  const table = new TermTable(run.partials.reduce((s, p) => Math.max(s, p.counts.length), 1024));
  let counts = new Float64Array(table.starts.length);
  let docFreqs = new Uint32Array(table.starts.length);
  let tokens = 0;
  const mergedIds = run.partials.map((p) => new Int32Array(p.counts.length));
  for (const [m, p] of run.partials.entries()) {
    tokens += p.tokens;
    const { arena, offsets } = p.terms;
    for (let i = 0; i < p.counts.length; i++) {
      const id = table.intern(arena, offsets[i], offsets[i + 1]);
      mergedIds[m][i] = id;
      if (id >= counts.length) {
        const c = new Float64Array(counts.length * 2);
        c.set(counts);
        counts = c;
        const d = new Uint32Array(docFreqs.length * 2);
        d.set(docFreqs);
        docFreqs = d;
      }
      counts[id] += p.counts[i];
      docFreqs[id] += p.docFreqs[i];
    }
  }

  // Keep terms by count and document frequency; ids by descending count, ties by term in code point order
  // (byte order of UTF-8 is code point order).
  const v = cfg.vocabulary;
  const kept: number[] = [];
  for (let id = 0; id < table.size; id++) if (counts[id] >= v.minCount && docFreqs[id] >= v.minDocFreq) kept.push(id);
  const { arena, starts } = table;
  kept.sort((a, b) => counts[b] - counts[a] || compareBytes(arena, starts[a], starts[a + 1], arena, starts[b], starts[b + 1]));
  const size = v.maxSize > 0 ? Math.min(v.maxSize, kept.length) : kept.length;
  const decoder = new TextDecoder();
  const vocab: Vocabulary = { terms: new Array<string>(size), counts: new Float64Array(size), docFreqs: new Uint32Array(size) };
  for (let i = 0; i < size; i++) {
    const id = kept[i];
    vocab.terms[i] = decoder.decode(arena.subarray(starts[id], starts[id + 1]));
    vocab.counts[i] = counts[id];
    vocab.docFreqs[i] = docFreqs[id];
  }
  let streams: TermsResult['streams'] = null;
  if (streamDir !== null) {
    // each mapper's term ids to the final ids (-1: not in the vocabulary), through the merged table's ids
    const finalOfMerged = new Int32Array(table.size).fill(-1);
    for (let i = 0; i < size; i++) finalOfMerged[kept[i]] = i;
    const finalIds = mergedIds.map((ids) => ids.map((id) => finalOfMerged[id]));
    streams = { refs: run.results.map((r) => r.stream!), finalIds };
  }
  progress.end(`${stats.documents} documents, ${tokens} tokens, ${table.size} distinct terms, ${size} kept (${run.threads} thread${run.threads > 1 ? 's' : ''})`);
  return {
    vocab,
    counter: { tokens, size: table.size },
    splits,
    splitDocuments: run.results.map((r) => r.stats.documents),
    threads: run.threads,
    streams,
  };
}

/** The terms as UTF-8 bytes back to back, in id order. */
function encodeTerms(terms: string[]): TermBytes {
  const encoded = terms.map((t) => Buffer.from(t, 'utf8'));
  const offsets = new Uint32Array(terms.length + 1);
  for (let i = 0; i < terms.length; i++) offsets[i + 1] = offsets[i] + encoded[i].length;
  const arena = new Uint8Array(offsets[terms.length]);
  for (let i = 0; i < terms.length; i++) arena.set(encoded[i], offsets[i]);
  return { arena, offsets };
}

/** Documents of each split (a reading pass without tokenizing). */
async function countDocuments(splits: InputSplit[], cfg: KindredConfig): Promise<number[]> {
  const out: number[] = [];
  const sink = { bytes: () => {}, text: () => {} };
  for (const split of splits) {
    const stats = emptyIngestStats();
    await readSplit(split, cfg.input, stats, sink, () => {});
    out.push(stats.documents);
  }
  return out;
}

/** Bytes of read buffer per spilled run during the merge (at least 64 KiB each, 64 MiB in all). */
const MERGE_BUFFER_BYTES = 64 << 20;

/** Pass 2: co-occurrence counts into row-partitioned shards, on worker threads; returns the marginals. */
export async function countPairs(
  files: string[], cfg: KindredConfig, exec: CountExec, terms: TermsResult | Vocabulary, nCols: number, ranges: RowRange[],
  workDir: string, capacity: number, progress: Progress, totalBytes: number,
): Promise<{ marginals: Marginals; entries: number[]; pairs: number; spilledRuns: number; threads: number }> {
  // Given only the vocabulary (pass 1 ran earlier, or elsewhere), the splits are planned again and, for
  // document contexts, their documents counted.
  const vocab = 'vocab' in terms ? terms.vocab : terms;
  const splits = 'vocab' in terms ? terms.splits : planSplits(files, cfg.input, splitBytes(totalBytes, exec.workers));
  const splitDocuments = 'vocab' in terms ? terms.splitDocuments
    : cfg.contexts.type === 'document' ? await countDocuments(splits, cfg) : splits.map(() => 0);
  const nRows = vocab.terms.length;
  const spillDir = path.join(workDir, 'spill');
  await fsp.mkdir(spillDir, { recursive: true });
  const mappers = Math.max(1, Math.min(exec.workers, splits.length));
  const plan = planAccumulators(cfg.memoryMiB, mappers, cfg.contexts, nRows, capacity);
  let firstDocument = 0;
  const streams = 'vocab' in terms ? terms.streams : null;
  const tasks = splits.map((split, i) => {
    const task: PairsTask = { split, firstDocument, ...(streams !== null ? { stream: streams.refs[i] } : {}) };
    firstDocument += splitDocuments[i];
    return task;
  });
  progress.start('count', totalBytes, 'B');
  let done = 0;
  const run = await runMap('pairs', (mapper) => ({
    input: cfg.input, tokenize: cfg.tokenize, baseDir: exec.baseDir, vocabulary: encodeTerms(vocab.terms), streamIds: streams?.finalIds ?? [], contexts: cfg.contexts,
    nCols, denseSize: plan.denseSize, bandRows: plan.bandRows, capacity: plan.capacity, spillDir, mapper,
  }), tasks, exec.workers, (n) => progress.update((done += n)));

  // Merge: the dense blocks summed cell by cell, every mapper's sorted hash entries, every spilled run.
  const runs: string[] = [];
  let pairs = 0;
  for (const p of run.partials) {
    pairs += p.pairs;
    runs.push(...p.runs);
  }
  const first = run.partials[0];
  const bufferRecords = Math.max(4096, Math.floor(MERGE_BUFFER_BYTES / 16 / Math.max(1, runs.length)));

  const rowSums = new Float64Array(nRows);
  const colSums = new Float64Array(nCols);
  const rowNnz = new Uint32Array(nRows);
  let total = 0;
  const { scale } = windowWeights(cfg.contexts);
  const partFile = (i: number): string => path.join(workDir, 'counts', partFileName(i));
  let entries: number[];
  if (nCols <= MAX_ROW_WISE_COLUMNS) {
    // row by row, one part per task on the threads: each row's entries summed in a dense scratch row; the
    // threads' rows and dense blocks are in shared memory, so every task reads them without a copy
    const tasks: MergeTask[] = ranges.map((r, i) => ({
      file: partFile(i), firstRow: r.firstRow, endRow: r.endRow,
      rows: run.partials.map((p) => ({ rowStart: p.rowStart, cols: p.cols, values: p.values })),
    }));
    const dense = first.denseSize > 0 ? { blocks: run.partials.map((p) => p.dense), size: first.denseSize, triangle: first.triangle } : null;
    const band = first.bandRows > 0 ? { blocks: run.partials.map((p) => p.band), rows: first.bandRows, denseSize: first.denseSize } : null;
    const merged = await runMap('merge', () => ({ nCols, scale, runs, bufferRecords, dense, band }), tasks, exec.workers);
    // sums of integers (scaled weights) are exact, so adding the parts' column sums in any order gives the same bits
    for (const [i, m] of merged.results.entries()) {
      rowSums.set(m.rowSums, ranges[i].firstRow);
      rowNnz.set(m.rowNnz, ranges[i].firstRow);
      for (let c = 0; c < nCols; c++) colSums[c] += m.colSums[c];
      total += m.total;
    }
    entries = merged.results.map((m) => m.entries);
  } else {
    const writers = ranges.map((_, i) => new ShardWriter(partFile(i), 'float64'));
    let part = 0;
    const sources: SortedSource[] = run.partials.map((p) => new RowsSource(p.rowStart, p.cols, p.values));
    if (first.denseSize > 0) sources.push(new DenseSource(run.partials.map((p) => p.dense), first.denseSize, first.triangle));
    for (const f of runs) sources.push(new RunReader(f, bufferRecords));
    mergeSources(sources, nCols, (r, c, scaled) => {
      rowSums[r] += scaled;
      colSums[c] += scaled;
      rowNnz[r]++;
      total += scaled;
      while (r >= ranges[part].endRow) part++;
      writers[part].append(r, c, scaled / scale);
    });
    for (const w of writers) await w.close();
    entries = writers.map((w) => w.entries);
  }
  for (const f of runs) rmSync(f, { force: true });
  if (streams !== null) for (const r of streams.refs) rmSync(r.file, { force: true });
  for (let r = 0; r < nRows; r++) rowSums[r] /= scale;
  for (let c = 0; c < nCols; c++) colSums[c] /= scale;
  const marginals: Marginals = { nRows, nCols, rowSums, colSums, total: total / scale, rowNnz };
  progress.end(`${pairs} pair events, ${entries.reduce((s, n) => s + n, 0)} nonzero counts, ${runs.length} spilled runs (${run.threads} thread${run.threads > 1 ? 's' : ''})`);
  return { marginals, entries, pairs, spilledRuns: runs.length, threads: run.threads };
}
