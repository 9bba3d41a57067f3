import { isAscii } from 'node:buffer';
import { promises as fsp, rmSync } from 'node:fs';
import path from 'node:path';
import type { ContextsConfig, KindredConfig, Normalization, VocabularyConfig, WeightingConfig } from '../config/types.js';
import { planSplits } from '../ingest/split.js';
import { addIngestStats, type IngestStats } from '../ingest/types.js';
import { runMap, type MapRun } from '../exec/pool.js';
import type { Progress } from '../progress.js';
import type { Marginals } from '../weight/types.js';
import { ShardWriter, partFileName, type ShardValueType } from '../store/shards.js';
import type { FileChecksum } from '../store/arrow-sink.js';
import type { Vocabulary } from '../store/vocab-file.js';
import { exactWeights, windowWeights } from './cooccur.js';
import { RunReader, mergeSources, MAX_ROW_WISE_COLUMNS } from './runs.js';
import type { MergeResult, MergeTask } from './merge-map.js';
import { compareBytes, type TermBytes } from './term-table.js';
import { MAX_FAN_IN, concatKept, termRanges, writeTermRun, type KeptTerms, type TermRun } from './term-runs.js';
import type { RowRange } from './partition.js';
import {
  ChunkMemory, chunkOf, chunkSource, narrowIds, planChunks, planSlices, sharedInt32, streamLengths, type Chunk, type ChunkIds, type ChunkSlice, type CorpusStreams, type SliceCounts,
} from './chunks.js';
import type { RowsTask } from './rows-map.js';
import type { VocabularyPartial } from './map.js';
import { gatherCapacity, gatherTasks, gatherWidth, groupLayout, planGroups, type RowGroup } from './gather.js';

/** How the counting passes run: where relative config paths start, and how many worker threads to use. */
export interface CountExec {
  baseDir: string;
  workers: number;
  /** Most terms of a vocabulary mapper's table before it is written to a run; derived from memoryMiB unless set (tests). */
  termLimit?: number;
}

/** Pass 1's result: the vocabulary, the corpus size, and the token streams pass 2 counts. */
export interface TermsResult {
  vocab: Vocabulary;
  /** tokens: all tokens read; size: distinct terms before the vocabulary filters. */
  counter: { tokens: number; size: number };
  threads: number;
  streams: CorpusStreams;
}

/** Bytes per split: a few splits per worker so threads stay busy, none too small to be worth a task. */
function splitBytes(totalBytes: number, workers: number): number {
  return Math.max(1 << 20, Math.ceil(totalBytes / (workers * 4)));
}

/** Share of the memory budget the vocabulary pass's term tables take, over all threads. */
const TERM_SHARE = 0.5;
/**
 * Bytes a term takes in a mapper's arrays at their fullest (term-table.ts, map.ts): start and hash 8, two hash
 * slots 8, count 8, document frequency and last document 8, flags 1, and the byte order when it hands them over 4.
 */
const BYTES_PER_TERM = 40;

/**
 * A vocabulary mapper's table limits for a memory budget: the most terms (a power of two, so no array grows past
 * it) in three quarters of the mapper's share, the term bytes (a power of two too) in the rest.
 */
export function termTableLimits(memoryMiB: number, workers: number, termLimit?: number): { termLimit: number; arenaLimit: number } {
  const share = Math.floor((memoryMiB * 1024 * 1024 * TERM_SHARE) / Math.max(1, workers));
  let terms = 256;
  while (BYTES_PER_TERM * terms * 2 <= share * 0.75) terms *= 2;
  let arena = 2048;
  while (arena * 2 <= share - BYTES_PER_TERM * terms) arena *= 2;
  return { termLimit: termLimit ?? terms, arenaLimit: arena };
}

/** Input splits of the passes that read the text. */
function splitsOf(files: string[], cfg: KindredConfig, totalBytes: number, workers: number) {
  return planSplits(files, cfg.input, splitBytes(totalBytes, workers));
}

/** Reads and tokenizes the input on the threads: term counts by term bytes, and a token stream per split. */
async function vocabularyPass(
  files: string[], cfg: KindredConfig, exec: CountExec, progress: Progress, totalBytes: number, streamDir: string,
): Promise<MapRun<'vocabulary'>> {
  const splits = splitsOf(files, cfg, totalBytes, exec.workers);
  const limits = termTableLimits(cfg.memoryMiB, exec.workers, exec.termLimit);
  progress.start('vocabulary', totalBytes, 'B');
  let done = 0;
  return runMap('vocabulary', (mapper) => ({ input: cfg.input, tokenize: cfg.tokenize, baseDir: exec.baseDir, streamDir, mapper, ...limits }), splits, exec.workers, (n) => progress.update((done += n)));
}

/**
 * Token streams of a known vocabulary (ids of its terms in order): the input read and tokenized again on the
 * threads, each token looked up in the vocabulary's terms (TokenMapper).
 */
async function vocabularyStreams(
  files: string[], cfg: KindredConfig, exec: CountExec, vocabulary: TermBytes, progress: Progress, totalBytes: number, streamDir: string,
): Promise<CorpusStreams> {
  const splits = splitsOf(files, cfg, totalBytes, exec.workers);
  progress.start('tokens', totalBytes, 'B');
  let done = 0;
  const run = await runMap('tokens', (mapper) => ({ input: cfg.input, tokenize: cfg.tokenize, baseDir: exec.baseDir, streamDir, mapper, vocabulary }), splits, exec.workers, (n) => progress.update((done += n)));
  // the streams hold final ids already, and the vocabulary's size for a term not in it
  const n = vocabulary.offsets.length - 1;
  const identity = sharedInt32(n + 1);
  for (let i = 0; i < n; i++) identity[i] = i;
  identity[n] = -1;
  progress.end(`${run.results.length} token streams (${run.threads} thread${run.threads > 1 ? 's' : ''})`);
  return { refs: run.results, finalIds: Array.from({ length: run.threads }, () => identity) };
}

/**
 * Pass 1: term counts and document frequencies over the whole corpus, on worker threads; each split's tokens
 * are also written to streamDir as token streams, which pass 2 then counts instead of reading the input. When
 * a thread's term table filled its share of the memory budget, its terms went to runs on disk (decision 35):
 * the runs are merged keeping only the vocabulary's terms, and the token streams are made by a second reading.
 */
export async function countTerms(
  files: string[], cfg: KindredConfig, exec: CountExec, stats: IngestStats, progress: Progress, totalBytes: number,
  streamDir: string,
): Promise<TermsResult> {
  const run = await vocabularyPass(files, cfg, exec, progress, totalBytes, streamDir);
  for (const r of run.results) addIngestStats(stats, r.stats);
  if (run.partials.some((p) => p.runs.length > 0)) return countTermsSpilled(files, cfg, exec, stats, progress, totalBytes, streamDir, run);

  // the loops over terms are functions of their own (here and in countPairs): an async function that holds
  // them is compiled whole, again at each of its loops, by the optimizing compiler, which costs more CPU
  // time than the loops themselves on a build of this size
  const merged = mergeTermCounts(run.partials);
  const { tokens } = merged;
  const kept = keptTerms(merged, cfg.vocabulary);
  const refs = run.results.map((r) => r.stream);
  // the threads wait while this thread sorts and writes the vocabulary: they touch the count pass's memory meanwhile
  prepareCountMemory(cfg, streamLengths({ refs, finalIds: [] }), kept.length, exec.workers);
  const { vocab, finalOfMerged } = keptVocabulary(merged, kept);
  const size = vocab.terms.length;
  // each mapper's term ids to the final ids (-1: not in the vocabulary), through the merged ids
  const finalIds = merged.mergedIds.map((ids) => mapShared(ids, finalOfMerged));
  const streams = { refs, finalIds };
  prepareChunk(streams);
  progress.end(vocabularyLine(stats, tokens, merged.size, size, run.threads));
  return {
    vocab,
    counter: { tokens, size: merged.size },
    threads: run.threads,
    streams,
  };
}

function vocabularyLine(stats: IngestStats, tokens: number, distinct: number, kept: number, threads: number): string {
  return `${stats.documents} documents, ${tokens} tokens, ${distinct} distinct terms, ${kept} kept (${threads} thread${threads > 1 ? 's' : ''})`;
}

/** countTerms when a term table filled: the runs merged, and token streams made again of the kept terms. */
async function countTermsSpilled(
  files: string[], cfg: KindredConfig, exec: CountExec, stats: IngestStats, progress: Progress, totalBytes: number,
  streamDir: string, run: MapRun<'vocabulary'>,
): Promise<TermsResult> {
  prepared = null;
  // the streams some threads wrote before (or without) filling a table are not used
  for (const r of run.results) rmSync(r.stream.file, { force: true });
  const { threads } = run;
  let tokens = 0;
  for (const p of run.partials) tokens += p.tokens;
  const written = termRuns(run.partials, streamDir);
  // the tables of threads that never filled one are in runs now: not held through the merge and the second reading
  run.partials.length = 0;
  progress.end(`${stats.documents} documents, ${tokens} tokens (${threads} thread${threads > 1 ? 's' : ''}); term tables written to ${written.length} runs`);
  const runs = await foldTermRuns(written, exec, progress, streamDir);
  progress.start('terms', runs.reduce((sum, r) => sum + r.bytes, 0), 'B');
  let done = 0;
  let parts: KeptTerms[];
  try {
    // ranges of terms merged on the threads (two a thread, for balance); in range order, one merge's result
    const merged = await runMap('terms', () => ({ runs, filter: cfg.vocabulary }), termRanges(runs, 2 * exec.workers), exec.workers, (n) => progress.update((done += n)));
    parts = merged.results;
  } finally {
    for (const r of runs) rmSync(r.file, { force: true });
  }
  const { terms, counts, docFreqs, distinct } = concatKept(parts);
  // the merge kept only terms that pass the count filters, at most twice maxSize: keptTerms orders them and cuts
  const merged: MergedTerms = { terms, size: counts.length, counts, docFreqs, mergedIds: [], tokens };
  const kept = keptTerms(merged, cfg.vocabulary);
  const { vocab } = keptVocabulary(merged, kept);
  progress.end(`${distinct} distinct terms, ${vocab.terms.length} kept (${runs.length} runs merged, ${parts.length} ranges)`);
  const streams = await vocabularyStreams(files, cfg, exec, termBytesOf(terms, kept), progress, totalBytes, streamDir);
  return { vocab, counter: { tokens, size: distinct }, threads, streams };
}

/**
 * Every mapper's runs, in mapper then epoch order, numbered by the mapper's place among the partials; a mapper
 * whose table never filled has it written as a run here (it is sorted already), so that all merge alike.
 */
function termRuns(partials: VocabularyPartial[], streamDir: string): TermRun[] {
  return partials.flatMap((p, m): TermRun[] => {
    if (p.runs.length > 0) return p.runs.map((r) => ({ ...r, mapper: m }));
    const file = path.join(streamDir, `m${String(m).padStart(3, '0')}-table.run`);
    const size = p.counts.length;
    const { bytes, index } = writeTermRun(file, { terms: p.terms, size, counts: p.counts, docFreqs: p.docFreqs, flags: null }, p.order);
    return [{ file, mapper: m, epoch: 0, continuedDoc: -1, openDoc: -1, bytes, index }];
  });
}

/**
 * More runs than a merge reads at once (MAX_FAN_IN) folded, on the threads, consecutive runs of a mapper into
 * one, as few as bring the count down to MAX_FAN_IN, round after round: each round a stage line ("fold"). When
 * every mapper is down to one run (more than MAX_FAN_IN threads), consecutive mappers' runs are folded
 * together: a mapper's only run has no open or continued document, so no flag links it to another. The folded
 * runs' files are removed.
 */
export async function foldTermRuns(runs: TermRun[], exec: CountExec, progress: Progress, streamDir: string): Promise<TermRun[]> {
  for (let round = 1; runs.length > MAX_FAN_IN; round++) {
    const acrossMappers = new Set(runs.map((r) => r.mapper)).size === runs.length;
    // consecutive runs in groups of at most MAX_FAN_IN, each group one mapper's unless acrossMappers, folding
    // groups only while the count is above MAX_FAN_IN
    let excess = runs.length - MAX_FAN_IN;
    const groups: TermRun[][] = [];
    for (const r of runs) {
      const g = groups[groups.length - 1];
      if (g !== undefined && excess > 0 && g.length < MAX_FAN_IN && (acrossMappers || g[0].mapper === r.mapper)) {
        g.push(r);
        excess--;
      } else groups.push([r]);
    }
    const folding = groups.filter((g) => g.length > 1);
    const tasks = folding.map((g, i) => ({ runs: g, file: path.join(streamDir, `fold-${round}-${String(i).padStart(6, '0')}.run`) }));
    progress.start('fold', folding.flat().reduce((sum, r) => sum + r.bytes, 0), 'B');
    let done = 0;
    const folded = (await runMap('fold', () => ({}), tasks, exec.workers, (n) => progress.update((done += n)))).results;
    for (const r of folding.flat()) rmSync(r.file, { force: true });
    const next = groups.map((g) => (g.length > 1 ? folded[folding.indexOf(g)] : g[0]));
    progress.end(`round ${round}: ${runs.length} term runs, ${folding.flat().length} of them folded into ${folding.length}`);
    runs = next;
  }
  return runs;
}

/** The terms `ids` of `terms`, in that order, as term bytes. */
function termBytesOf(terms: TermBytes, ids: readonly number[]): TermBytes {
  const offsets = new Uint32Array(ids.length + 1);
  for (let i = 0; i < ids.length; i++) offsets[i + 1] = offsets[i] + terms.offsets[ids[i] + 1] - terms.offsets[ids[i]];
  const arena = new Uint8Array(offsets[ids.length]);
  for (let i = 0; i < ids.length; i++) arena.set(terms.arena.subarray(terms.offsets[ids[i]], terms.offsets[ids[i] + 1]), offsets[i]);
  return { arena, offsets };
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

/** The mappers' terms merged: merged ids in the order of the terms' bytes, each mapper's ids to them, the sums. */
interface MergedTerms {
  terms: TermBytes;
  size: number;
  counts: Float64Array;
  docFreqs: Uint32Array;
  mergedIds: Int32Array[];
  tokens: number;
}

/** Terms in byte order with their sums: a mapper's (through its `order`) or a merge of them (in order). */
interface SortedTerms {
  terms: TermBytes;
  /** Ids in byte order; null: 0, 1, 2, ... */
  order: Uint32Array | null;
  counts: Float64Array;
  docFreqs: Uint32Array;
}

/**
 * The threads' term counts merged by term bytes: each mapper's terms come sorted (`order`), so they are merged two
 * lists at a time, as a merge sort's last steps would, and the merged ids are in byte order. The result does not
 * depend on which thread read which split.
 */
export function mergeTermCounts(partials: VocabularyPartial[]): MergedTerms {
  let tokens = 0;
  for (const p of partials) tokens += p.tokens;
  let lists: SortedTerms[] = partials.map((p) => ({ terms: p.terms, order: p.order, counts: p.counts, docFreqs: p.docFreqs }));
  // each mapper's ids to the ids of the list that holds its terms now
  const mergedIds = partials.map((p) => {
    const ids = new Int32Array(p.counts.length);
    for (let i = 0; i < p.order.length; i++) ids[p.order[i]] = i;
    return ids;
  });
  const listOf = partials.map((_, m) => m);
  while (lists.length > 1) {
    const next: SortedTerms[] = [];
    const maps: Int32Array[] = [];
    for (let l = 0; l + 1 < lists.length; l += 2) {
      const { merged, aIds, bIds } = mergeTwo(lists[l], lists[l + 1]);
      next.push(merged);
      maps[l] = aIds;
      maps[l + 1] = bIds;
    }
    if (lists.length % 2 === 1) next.push(lists[lists.length - 1]);
    for (const [m, ids] of mergedIds.entries()) {
      const map = maps[listOf[m]];
      if (map !== undefined) for (let i = 0; i < ids.length; i++) ids[i] = map[ids[i]];
      listOf[m] = listOf[m] >> 1;
    }
    lists = next;
  }
  const only = lists[0] ?? { terms: { arena: new Uint8Array(0), offsets: new Uint32Array(1) }, order: null, counts: new Float64Array(0), docFreqs: new Uint32Array(0) };
  // a mapper alone (one thread): its terms put in order, position i becoming merged id i, as mergedIds has them
  const sorted = only.order === null ? only : mergeTwo(only, null).merged;
  return { terms: sorted.terms, size: sorted.counts.length, counts: sorted.counts, docFreqs: sorted.docFreqs, mergedIds, tokens };
}

/**
 * Two sorted lists of distinct terms merged into one, in order (b null: a alone, put in order): the terms, their
 * summed counts and document frequencies, and where each position of a and of b went.
 */
function mergeTwo(a: SortedTerms, b: SortedTerms | null): { merged: SortedTerms; aIds: Int32Array; bIds: Int32Array } {
  const na = a.counts.length;
  const nb = b === null ? 0 : b.counts.length;
  const A = a.terms.arena;
  const aStart = a.terms.offsets;
  const B = b === null ? A : b.terms.arena;
  const bStart = b === null ? aStart : b.terms.offsets;
  const aOrder = a.order;
  const bOrder = b === null ? null : b.order;
  const bytes = aStart[na] + (b === null ? 0 : bStart[nb]);
  const arena = new Uint8Array(bytes);
  const offsets = new Uint32Array(na + nb + 1);
  const counts = new Float64Array(na + nb);
  const docFreqs = new Uint32Array(na + nb);
  const aIds = new Int32Array(na);
  const bIds = new Int32Array(nb);
  let i = 0;
  let j = 0;
  let size = 0;
  let fill = 0;
  while (i < na || j < nb) {
    const x = i < na ? (aOrder === null ? i : aOrder[i]) : -1;
    const y = j < nb ? (bOrder === null ? j : bOrder[j]) : -1;
    const c = x < 0 ? 1 : y < 0 ? -1 : compareBytes(A, aStart[x], aStart[x + 1], B, bStart[y], bStart[y + 1]);
    if (c <= 0) {
      for (let k = aStart[x]; k < aStart[x + 1]; k++) arena[fill++] = A[k];
      counts[size] = a.counts[x];
      docFreqs[size] = a.docFreqs[x];
      aIds[i++] = size;
    } else {
      for (let k = bStart[y]; k < bStart[y + 1]; k++) arena[fill++] = B[k];
    }
    if (c >= 0) {
      counts[size] += b!.counts[y];
      docFreqs[size] += b!.docFreqs[y];
      bIds[j++] = size;
    }
    offsets[++size] = fill;
  }
  const merged = { terms: { arena, offsets: offsets.subarray(0, size + 1) }, order: null, counts: counts.subarray(0, size), docFreqs: docFreqs.subarray(0, size) };
  return { merged, aIds, bIds };
}

/**
 * The merged ids of the terms kept by count and document frequency, as many as the vocabulary holds, in the
 * vocabulary's order (sortKept).
 */
function keptTerms({ size, counts, docFreqs }: MergedTerms, v: VocabularyConfig): number[] {
  const kept: number[] = [];
  for (let id = 0; id < size; id++) if (counts[id] >= v.minCount && docFreqs[id] >= v.minDocFreq) kept.push(id);
  const sorted = sortKept(kept, counts, size);
  if (v.maxSize > 0 && sorted.length > v.maxSize) sorted.length = v.maxSize;
  return sorted;
}

/**
 * Merged ids (in byte order, so in code point order of their terms) by descending count, ties by id: through one
 * number per id, (most - count) * size + id, sorted natively, when that is exact (counts are whole numbers), else
 * with a comparator.
 */
function sortKept(kept: number[], counts: Float64Array, size: number): number[] {
  let most = 0;
  for (const id of kept) most = Math.max(most, counts[id]);
  if ((most + 1) * size > Number.MAX_SAFE_INTEGER) return kept.sort((a, b) => counts[b] - counts[a] || a - b);
  const keys = new Float64Array(kept.length);
  for (let i = 0; i < kept.length; i++) keys[i] = (most - counts[kept[i]]) * size + kept[i];
  keys.sort();
  const out = new Array<number>(kept.length);
  for (let i = 0; i < keys.length; i++) out[i] = keys[i] % size;
  return out;
}

/** The vocabulary of the kept terms (in order, keptTerms); each merged id's final id (-1: not kept). */
function keptVocabulary({ terms, size, counts, docFreqs }: MergedTerms, kept: number[]): { vocab: Vocabulary; finalOfMerged: Int32Array } {
  const n = kept.length;
  const vocab: Vocabulary = { terms: decodeTerms(terms, kept), counts: new Float64Array(n), docFreqs: new Uint32Array(n) };
  const finalOfMerged = new Int32Array(size).fill(-1);
  for (let i = 0; i < n; i++) {
    const id = kept[i];
    vocab.counts[i] = counts[id];
    vocab.docFreqs[i] = docFreqs[id];
    finalOfMerged[id] = i;
  }
  return { vocab, finalOfMerged };
}

/**
 * The terms of `ids` as strings: all terms decoded at once and cut (a decoder call per term took 45 ms on
 * Brown x10's 48,931 terms, the one call 7 ms). Term bytes are valid UTF-8 (the tokenizer encodes strings), so
 * the whole decodes as the terms one by one would; a term's start in UTF-16 units counts the characters before
 * it, two for those of four bytes.
 */
export function decodeTerms({ arena, offsets }: TermBytes, ids: readonly number[]): string[] {
  const n = offsets.length - 1;
  const bytes = Buffer.from(arena.buffer, arena.byteOffset, offsets[n]);
  const out = new Array<string>(ids.length);
  if (isAscii(bytes)) {
    const all = bytes.toString('latin1');
    for (let i = 0; i < ids.length; i++) out[i] = all.substring(offsets[ids[i]], offsets[ids[i] + 1]);
    return out;
  }
  const all = bytes.toString('utf8');
  const units = new Uint32Array(n + 1);
  let u = 0;
  for (let t = 0; t < n; t++) {
    units[t] = u;
    for (let b = offsets[t]; b < offsets[t + 1]; b++) {
      const x = bytes[b];
      if ((x & 0xc0) !== 0x80) u += x >= 0xf0 ? 2 : 1;
    }
  }
  units[n] = u;
  for (let i = 0; i < ids.length; i++) out[i] = all.substring(units[ids[i]], units[ids[i] + 1]);
  return out;
}

/** ids mapped through `to`, in shared memory. */
function mapShared(ids: Int32Array, to: Int32Array): Int32Array {
  const shared = sharedInt32(ids.length);
  for (let i = 0; i < ids.length; i++) shared[i] = to[ids[i]];
  return shared;
}

/** target[at + i] += source[i] for every i. */
function addAt(target: Float64Array | Uint32Array, at: number, source: Float64Array | Uint32Array): void {
  for (let i = 0; i < source.length; i++) target[at + i] += source[i];
}

/**
 * Token streams for a vocabulary read from an earlier build's file (the count stage rerun without the
 * vocabulary pass): the input is read and tokenized again, each token looked up in the vocabulary.
 */
export async function tokenStreams(
  files: string[], cfg: KindredConfig, exec: CountExec, vocab: Vocabulary, progress: Progress, totalBytes: number, streamDir: string,
): Promise<CorpusStreams> {
  return vocabularyStreams(files, cfg, exec, encodeTerms(vocab.terms), progress, totalBytes, streamDir);
}

/** Share of the memory budget a chunk of the corpus takes when counted (at most 4 bytes a token: its ids). */
const CHUNK_SHARE = 0.25;
/** Most tokens of a chunk (its term counts are int32). */
const MAX_CHUNK_TOKENS = 2 ** 30;

/** Tokens of a chunk that fit a memory budget. */
export function chunkTokensFor(memoryMiB: number): number {
  return Math.min(MAX_CHUNK_TOKENS, Math.max(1 << 16, Math.floor((memoryMiB * 1024 * 1024 * CHUNK_SHARE) / 4)));
}

/** Share of the memory budget the gathering buffer takes (gather.ts). */
const GATHER_SHARE = 0.25;
/**
 * Groups a chunk's rows are gathered in, if the budget allows: each is one scan of the chunk (split between the
 * threads), and a bigger buffer is more fresh memory to touch, which is slow (docs/performance.md).
 */
const GROUPS_PER_CHUNK = 4;
/** Least bytes of the gathering buffer, unless the budget is smaller. */
const MIN_GATHER_BYTES = 8 << 20;

/** Bytes of the gathering buffer for chunks of at most `maxOwn` tokens. */
export function gatherBytesFor(memoryMiB: number, maxOwn: number, contexts: ContextsConfig, nRows: number): number {
  const entryBytes = contexts.type === 'window' && narrowIds(nRows) ? 2 : 4;
  const wanted = Math.max(MIN_GATHER_BYTES, Math.ceil((maxOwn * gatherWidth(contexts).width * entryBytes) / GROUPS_PER_CHUNK));
  return Math.min(Math.floor(memoryMiB * 1024 * 1024 * GATHER_SHARE), wanted);
}

/**
 * Whether symmetric windows are counted mirrored: only the right-hand windows R are gathered and counted, and
 * the counts are R + Rᵀ (the left-hand window of w holding c at distance d is the right-hand window of c
 * holding w at d, with the same weight and the same document), put together by the merge from each cell
 * written twice (rows-map.ts, merge-map.ts): half the gathering and adding. Exact because the weights are
 * integers (every sum is exact in any order); in one chunk, whose runs hold each row once; rows and columns
 * are the same terms; the merge sums rows in a dense scratch row.
 */
function mirroredCounting(ctx: ContextsConfig, chunks: number, nRows: number): boolean {
  return ctx.type === 'window' && ctx.direction === 'symmetric' && exactWeights(ctx) && chunks === 1 && nRows <= MAX_ROW_WISE_COLUMNS;
}

/** The count pass's chunks and shared memory, for a corpus of stream entries in files of `lengths` over nRows terms. */
function countPlan(cfg: KindredConfig, lengths: number[], nRows: number, chunkTokens: number) {
  const margin = cfg.contexts.type === 'document' ? 0 : cfg.contexts.window;
  const chunks = planChunks(lengths.reduce((s, n) => s + n, 0), chunkTokens);
  const mirrored = mirroredCounting(cfg.contexts, chunks.length, nRows);
  // the contexts the count tasks gather and count: the right-hand windows only when mirrored
  const ctx: ContextsConfig = mirrored ? { ...cfg.contexts, direction: 'right' } : cfg.contexts;
  const maxOwn = chunks.reduce((m, k) => Math.max(m, k.to - k.from), 0);
  const gatherBytes = gatherBytesFor(cfg.memoryMiB, maxOwn, ctx, nRows);
  return { chunks, margin, maxOwn, gatherBytes, ctx, mirrored, key: JSON.stringify([maxOwn, margin, nRows, gatherBytes]) };
}


/**
 * The count pass's memory, made and touched on the threads ahead of it (prepareCountMemory), and its one chunk
 * loaded into it (prepareChunk) from `streams`; null when not.
 */
let prepared: {
  key: string; memory: ChunkMemory; touched: Promise<boolean>; margin: number; workers: number;
  streams: CorpusStreams | null; loaded: Promise<LoadedChunk | null> | null;
} | null = null;

/**
 * Makes the count pass's memory now and has the threads touch it (TouchMapper) while the calling thread goes on
 * (finishing the vocabulary): with several threads, a corpus counted in one chunk. The threads are idle then, and
 * a first touch is slow (about 3.5 ms per MiB here, 70 MB on Brown x10); with many chunks the memory is reused
 * and the cost is spread. The count pass takes the memory if its plan is the same (countMemory).
 */
function prepareCountMemory(cfg: KindredConfig, lengths: number[], nRows: number, workers: number): void {
  prepared = null;
  const plan = countPlan(cfg, lengths, nRows, chunkTokensFor(cfg.memoryMiB));
  if (workers < 2 || plan.chunks.length !== 1) return;
  const memory = new ChunkMemory(plan.maxOwn, plan.margin, nRows, false, plan.gatherBytes);
  const buffers = memory.bulk();
  const touching = runMap('touch', (part) => ({ buffers, part, parts: workers }), new Array<null>(workers).fill(null), workers);
  // a failure to touch is no failure of the build: the count pass then makes its own memory
  prepared = { key: plan.key, memory, touched: touching.then(() => true, () => false), margin: plan.margin, workers, streams: null, loaded: null };
}

/**
 * Loads the one chunk of `streams` into the memory made ahead, once touched, while the calling thread writes and
 * seals the vocabulary: loading needs only the final ids. The count pass takes it when it counts those streams
 * with the same plan (countMemory); a failed load leaves the count pass to load (and report) it itself.
 */
function prepareChunk(streams: CorpusStreams): void {
  const ahead = prepared;
  if (ahead === null) return;
  const lengths = streamLengths(streams);
  const total = lengths.reduce((s, n) => s + n, 0);
  ahead.streams = streams;
  ahead.loaded = ahead.touched
    .then((ok) => (ok ? loadChunk(streams, lengths, 0, total, ahead.margin, ahead.memory, 0, ahead.workers) : null))
    .catch(() => null);
}

/**
 * The memory of a count pass of the given plan over `streams`: the one made ahead (once touched), with its one
 * chunk when loaded ahead from these streams, else a new one.
 */
async function countMemory(plan: ReturnType<typeof countPlan>, nRows: number, streams: CorpusStreams): Promise<{ memory: ChunkMemory; loaded: LoadedChunk | null }> {
  const ahead = prepared;
  prepared = null;
  if (ahead !== null && (await ahead.touched) && ahead.key === plan.key) {
    const loaded = ahead.streams === streams && ahead.loaded !== null && plan.chunks.length === 1 ? await ahead.loaded : null;
    return { memory: ahead.memory, loaded };
  }
  return { memory: new ChunkMemory(plan.maxOwn, plan.margin, nRows, false, plan.gatherBytes), loaded: null };
}

/** A loaded chunk, and the slices it was loaded in with their counts (for gathering, gather.ts). */
export interface LoadedChunk {
  chunk: Chunk;
  slices: ChunkSlice[];
  counted: SliceCounts[];
}

/**
 * Loads the chunk owning stream entries [from, to) in one slice per worker (chunks.ts, chunk-map.ts);
 * `firstDocument` is the number of documents that end before `from`.
 */
export async function loadChunk(
  streams: CorpusStreams, lengths: number[], from: number, to: number, margin: number, memory: ChunkMemory, firstDocument: number, workers: number,
): Promise<LoadedChunk> {
  const source = chunkSource(streams, lengths, from, to, margin, memory);
  const slices = planSlices(source, workers);
  const filled = await runMap('chunk', () => ({ source }), slices.map((slice) => ({ slice })), workers);
  return { chunk: chunkOf(source, filled.results, memory, firstDocument), slices, counted: filled.results };
}

/**
 * Gathers a group's occurrences into the shared buffer, one slice of the chunk per thread (gather.ts); returns
 * where they lie in it, or null for a lone row, which its count task gathers itself.
 */
export async function gatherGroup(loaded: LoadedChunk, group: RowGroup, contexts: ContextsConfig, buffer: ChunkIds, workers: number): Promise<Int32Array | null> {
  if (!group.fits) return null;
  const { chunk, slices, counted } = loaded;
  const layout = groupLayout(group, counted);
  if (chunk.rowStart[group.end] > chunk.rowStart[group.first]) {
    const tasks = gatherTasks(chunk, slices, counted, group, layout, gatherWidth(contexts).width);
    await runMap('gather', () => ({ chunk, contexts, buffer }), tasks, workers);
  }
  return layout;
}

/** Count tasks per thread and chunk: enough that threads finish together, few enough that each is worth a task. */
const TASKS_PER_WORKER = 4;

/**
 * A group's rows cut into count tasks of about equal work (a row's work is its occurrences in the chunk),
 * never across a part's boundary, so that each run belongs to one part; a lone row is one task.
 */
function planRowTasks(rowStart: Int32Array, ranges: RowRange[], group: RowGroup, workers: number): { firstRow: number; endRow: number; part: number; cost: number }[] {
  const goal = Math.max(1, (rowStart[group.end] - rowStart[group.first]) / (workers * TASKS_PER_WORKER));
  const tasks: { firstRow: number; endRow: number; part: number; cost: number }[] = [];
  for (const [part, range] of ranges.entries()) {
    let first = Math.max(range.firstRow, group.first);
    const last = Math.min(range.endRow, group.end);
    while (first < last) {
      let end = first + 1;
      while (end < last && rowStart[end + 1] - rowStart[first] <= goal) end++;
      tasks.push({ firstRow: first, endRow: end, part, cost: rowStart[end] - rowStart[first] });
      first = end;
    }
  }
  return tasks;
}

/** Bytes of read buffer per run during the merge: 64 MiB in all, each between 64 KiB and 256 KiB (the runs were just written, so they are read from the page cache; bigger buffers only cost fresh memory). */
const MERGE_BUFFER_BYTES = 64 << 20;
const MIN_RUN_BUFFER_RECORDS = 4096;
const MAX_RUN_BUFFER_RECORDS = 16384;

/** Where the weighted shards go when counting may weight as well, and how to weight. */
export interface WeighTarget {
  weighting: WeightingConfig;
  normalize: Normalization;
  valueType: ShardValueType;
  dir: string;
}

/**
 * Pass 2: co-occurrence counts into row-partitioned shards, on worker threads; returns the marginals. The
 * token streams are counted chunk by chunk (each chunk's rows written as sorted runs, a run per task), then
 * each part's runs are summed row by row into its shard. Counted in one chunk with integer weights, the
 * count tasks' sums are the marginals already, so with a `weigh` target each part's weighted shard is
 * written while its counts are (`weighted`: the entries of each; null when not).
 */
export async function countPairs(
  cfg: KindredConfig, exec: CountExec, streams: CorpusStreams, nRows: number, nCols: number, ranges: RowRange[],
  workDir: string, chunkTokens: number, progress: Progress, weigh: WeighTarget | null = null, mirrorEntriesAsked?: number,
): Promise<{
  marginals: Marginals; entries: number[]; weighted: number[] | null; pairs: number; chunks: number; threads: number; mirrored: boolean;
  /** Size and SHA-256 of each part's counts shard and (when weighted) weighted shard, as written; null: not known. */
  checksums: { counts: FileChecksum[]; weighted: FileChecksum[] | null } | null;
}> {
  const runDir = path.join(workDir, 'runs');
  await fsp.mkdir(runDir, { recursive: true });
  const { weights, scale } = windowWeights(cfg.contexts);
  const lengths = streamLengths(streams);
  const total = lengths.reduce((s, n) => s + n, 0);
  const plan = countPlan(cfg, lengths, nRows, chunkTokens);
  // ctx: what the count tasks count (the right-hand windows only when mirrored)
  const { chunks, margin, ctx, mirrored } = plan;
  const partRuns: string[][] = ranges.map(() => []);
  // mirrored: the segments of mirror files bound for each part, with the first row of the task that wrote them
  const partMirrors: { firstRow: number; file: string; start: number; count: number }[][] = ranges.map(() => []);
  const mirrorFiles: string[] = [];
  const partOf = mirrored ? sharedInt32(nCols) : null;
  for (const [p, r] of ranges.entries()) partOf?.fill(p, r.firstRow, r.endRow);
  // the count tasks' sums (scaled), complete when there is one chunk
  const early = { rowSums: new Float64Array(nRows), rowNnz: new Uint32Array(nRows), colSums: new Float64Array(nCols), colNnz: new Uint32Array(nCols) };
  let pairs = 0;
  let threads = 1;
  let firstDocument = 0;
  let removed = 0;
  progress.start('count', total, 'tokens');
  let done = 0;
  const { memory, loaded: loadedAhead } = await countMemory(plan, nRows, streams);
  const gathered = memory.gatheredOf(ctx.type === 'document');
  const capacity = gatherCapacity(gathered, ctx);
  for (const [c, { from, to }] of chunks.entries()) {
    const loaded = c === 0 && loadedAhead !== null ? loadedAhead : await loadChunk(streams, lengths, from, to, margin, memory, firstDocument, exec.workers);
    const { chunk } = loaded;
    firstDocument += chunk.documentEnds;
    // streams wholly behind the next chunk's reach are no longer needed
    const keepFrom = c + 1 < chunks.length ? chunks[c + 1].from - margin : total;
    for (let end = 0, f = 0; f < lengths.length; f++) {
      end += lengths[f];
      if (f >= removed && end <= keepFrom) {
        rmSync(streams.refs[f].file, { force: true });
        removed = f + 1;
      }
    }
    // rows in groups whose occurrences fit the gathering buffer: each group gathered in slices on the threads,
    // then counted in tasks on the threads, the costliest first, so that the threads finish together
    const chunkCost = Math.max(1, chunk.rowStart[nRows]);
    for (const [g, group] of planGroups(chunk.rowStart, nRows, capacity).entries()) {
      const layout = await gatherGroup(loaded, group, ctx, gathered, exec.workers);
      const planned = planRowTasks(chunk.rowStart, ranges, group, exec.workers);
      const order = planned.map((_, i) => i).sort((a, b) => planned[b].cost - planned[a].cost || a - b);
      const tasks: RowsTask[] = order.map((i) => ({
        firstRow: planned[i].firstRow, endRow: planned[i].endRow,
        file: path.join(runDir, `c${String(c).padStart(5, '0')}-g${String(g).padStart(5, '0')}-t${String(i).padStart(5, '0')}.bin`),
        progress: ((to - from) * planned[i].cost) / chunkCost,
      }));
      // mirrored: a mirror file per thread
      const mirrorOf = (m: number): string => path.join(runDir, `c${String(c).padStart(5, '0')}-g${String(g).padStart(5, '0')}-mirror${String(m).padStart(3, '0')}.bin`);
      const run = await runMap('rows', (m) => {
        if (partOf !== null) mirrorFiles.push(mirrorOf(m));
        return { chunk, contexts: ctx, weights, nCols, gathered, group, layout, mirror: partOf === null ? null : { partOf, parts: ranges.length, file: mirrorOf(m) } };
      }, tasks, exec.workers, (n) => progress.update((done += n)));
      threads = Math.max(threads, run.threads);
      for (const [j, r] of run.results.entries()) {
        pairs += mirrored ? 2 * r.pairs : r.pairs;
        addAt(early.rowSums, tasks[j].firstRow, r.rowSums);
        addAt(early.rowNnz, tasks[j].firstRow, r.rowNnz);
        for (const m of r.mirror) partMirrors[m.part].push({ firstRow: tasks[j].firstRow, file: r.mirrorFile!, start: m.start, count: m.count });
      }
      for (const p of run.partials) {
        addAt(early.colSums, 0, p.colSums);
        addAt(early.colNnz, 0, p.colNnz);
      }
      // runs in row order within each part
      const fileOf = new Array<string>(planned.length);
      for (const [j, i] of order.entries()) fileOf[i] = tasks[j].file;
      for (const [i, t] of planned.entries()) partRuns[t.part].push(fileOf[i]);
    }
  }
  for (const r of streams.refs) rmSync(r.file, { force: true });

  const rowSums = new Float64Array(nRows);
  const colSums = new Float64Array(nCols);
  const rowNnz = new Uint32Array(nRows);
  let sumAll = 0;
  const partFile = (i: number): string => path.join(workDir, 'counts', partFileName(i));
  const maxRuns = partRuns.reduce((m, r) => Math.max(m, r.length), 1);
  const bufferRecords = Math.min(MAX_RUN_BUFFER_RECORDS, Math.max(MIN_RUN_BUFFER_RECORDS, Math.floor(MERGE_BUFFER_BYTES / 16 / maxRuns)));
  let entries: number[];
  let weighted: number[] | null = null;
  let checksums: { counts: FileChecksum[]; weighted: FileChecksum[] | null } | null = null;
  if (nCols <= MAX_ROW_WISE_COLUMNS) {
    // with integer weights the sums are exact, so the count tasks' sums are the marginals the merge sums
    const fuse = weigh !== null && chunks.length === 1 && exactWeights(ctx) ? weigh : null;
    // mirrored, the counts are R + Rᵀ: a row's sum is R's row sum plus R's column sum, and so is the column's
    // (exact: sums of integers); the rows' nonzeros are known once merged (no window weighting reads them)
    const earlySums = mirrored ? early.rowSums.map((v, r) => v + early.colSums[r]) : early.rowSums;
    const earlyMarginals = fuse === null ? null
      : scaledMarginals(earlySums.slice(), mirrored ? earlySums.slice() : early.colSums.slice(), mirrored ? new Uint32Array(nRows) : early.rowNnz, scale);
    const weighSetup = fuse === null || earlyMarginals === null ? null
      : { weighting: fuse.weighting, normalize: fuse.normalize, valueType: fuse.valueType, marginals: earlyMarginals };
    // one part per task on the threads, each row's entries summed in a dense scratch row
    // the largest parts first (by the count tasks' entries: exact in one chunk, an upper bound in many), so that
    // the threads finish together
    const size = ranges.map((r) => early.rowNnz.subarray(r.firstRow, r.endRow).reduce((s, n) => s + n, 0) + (mirrored ? early.colNnz.subarray(r.firstRow, r.endRow).reduce((s, n) => s + n, 0) : 0));
    const order = ranges.map((_, i) => i).sort((a, b) => size[b] - size[a] || a - b);
    const tasks: MergeTask[] = order.map((i) => ({
      file: partFile(i), firstRow: ranges[i].firstRow, endRow: ranges[i].endRow, runs: partRuns[i],
      weightedFile: fuse === null ? null : path.join(fuse.dir, partFileName(i)),
      // a task's segments in the order written (the sort is stable)
      mirror: mirrored
        ? { segments: partMirrors[i].sort((a, b) => a.firstRow - b.firstRow).map(({ file, start, count }) => ({ file, start, count })), nnz: early.colNnz.slice(ranges[i].firstRow, ranges[i].endRow) }
        : null,
    }));
    // mirrored, the threads hold the Rᵀ entries of the rows they merge in the chunk's memory, done with by now
    // and touched already: a share of its ids for the columns, of its gathering buffer for the values
    const [idsMemory, gatherMemory] = memory.bulk();
    const workers = Math.max(1, exec.workers);
    const fits = Math.max(1, Math.min(Math.floor(idsMemory.byteLength / workers / 4), Math.floor(gatherMemory.byteLength / workers / 8)));
    const mirrorEntries = Math.min(fits, mirrorEntriesAsked ?? fits);
    const run = await runMap('merge', (m) => ({
      nCols, scale, bufferRecords, disjoint: chunks.length === 1, weigh: weighSetup, mirrorEntries,
      mirrorMemory: mirrored ? { cols: idsMemory, vals: gatherMemory, slot: m } : null,
    }), tasks, exec.workers);
    const merged = new Array<MergeResult>(ranges.length);
    for (const [j, i] of order.entries()) merged[i] = run.results[j];
    // sums of integers (scaled weights) are exact, so adding the parts' column sums in any order gives the same bits
    for (const [i, m] of merged.entries()) {
      rowSums.set(m.rowSums, ranges[i].firstRow);
      rowNnz.set(m.rowNnz, ranges[i].firstRow);
      addAt(colSums, 0, m.colSums);
      sumAll += m.total;
    }
    entries = merged.map((m) => m.entries);
    checksums = { counts: merged.map((m) => m.countsChecksum), weighted: null };
    if (earlyMarginals !== null) {
      const final = scaledMarginals(rowSums.slice(), colSums.slice(), rowNnz, scale);
      if (!sameMarginals(final, earlyMarginals, !mirrored)) throw new Error('the count tasks\' sums differ from the merged counts\' (a bug)');
      weighted = merged.map((m) => m.weightedEntries);
      checksums.weighted = merged.map((m) => m.weightedChecksum!);
    }
  } else {
    // too wide for a dense scratch row: a heap over each part's runs
    entries = [];
    for (const [i, runs] of partRuns.entries()) {
      const writer = new ShardWriter(partFile(i), 'float64');
      mergeSources(runs.map((f) => new RunReader(f, bufferRecords)), nCols, (r, c, scaled) => {
        rowSums[r] += scaled;
        colSums[c] += scaled;
        rowNnz[r]++;
        sumAll += scaled;
        writer.append(r, c, scaled / scale);
      });
      await writer.close();
      entries.push(writer.entries);
    }
  }
  for (const runs of partRuns) for (const f of runs) rmSync(f, { force: true });
  for (const f of mirrorFiles) rmSync(f, { force: true });
  const marginals = scaledMarginals(rowSums, colSums, rowNnz, scale, sumAll);
  progress.end(`${pairs} pair events, ${entries.reduce((s, n) => s + n, 0)} nonzero counts, ${chunks.length} chunk${chunks.length > 1 ? 's' : ''} (${threads} thread${threads > 1 ? 's' : ''})`);
  return { marginals, entries, weighted, pairs, chunks: chunks.length, threads, checksums, mirrored };
}

/** Marginals from scaled row and column sums (divided in place); total: the scaled sum of all cells, else the row sums' sum. */
function scaledMarginals(rowSums: Float64Array, colSums: Float64Array, rowNnz: Uint32Array, scale: number, total?: number): Marginals {
  let sum = total ?? 0;
  if (total === undefined) for (let r = 0; r < rowSums.length; r++) sum += rowSums[r];
  for (let r = 0; r < rowSums.length; r++) rowSums[r] /= scale;
  for (let c = 0; c < colSums.length; c++) colSums[c] /= scale;
  return { nRows: rowSums.length, nCols: colSums.length, rowSums, colSums, total: sum / scale, rowNnz };
}

function sameMarginals(a: Marginals, b: Marginals, nonzeros: boolean): boolean {
  if (a.total !== b.total) return false;
  for (let r = 0; r < a.nRows; r++) if (a.rowSums[r] !== b.rowSums[r] || (nonzeros && a.rowNnz[r] !== b.rowNnz[r])) return false;
  for (let c = 0; c < a.nCols; c++) if (a.colSums[c] !== b.colSums[c]) return false;
  return true;
}
