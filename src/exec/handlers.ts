/** The kinds of map task the local executor runs, and how a thread (or the main thread) starts each. */
import type { InputSplit } from '../ingest/split.js';
import {
  TokenMapper, VocabularyMapper, transferablesOf as countTransferables, type SplitResult, type TokenSetup,
  type VocabularyPartial, type VocabularySetup,
} from '../count/map.js';
import { foldRuns, mergeTermRange, type FoldTask, type KeptTerms, type TermMergeSetup, type TermRange, type TermRun } from '../count/term-runs.js';
import type { TokenStreamRef } from '../count/token-stream.js';
import { RowsMapper, type RowsPartial, type RowsResult, type RowsSetup, type RowsTask } from '../count/rows-map.js';
import { ChunkMapper, TouchMapper, type ChunkSetup, type ChunkTask, type TouchSetup } from '../count/chunk-map.js';
import type { SliceCounts } from '../count/chunks.js';
import { GatherMapper, type GatherSetup, type GatherTask } from '../count/gather.js';
import type { WeightResult, WeightSetup, WeightTask } from '../weight/map.js';
import type { MergeResult, MergeSetup, MergeTask } from '../count/merge-map.js';

/** One mapper: runs tasks one after the other, then hands over its accumulated partial result. */
export interface Mapper<Task, Result, Partial> {
  run(task: Task, onProgress: (bytes: number) => void): Promise<Result>;
  /** The partial result, once the mapper's work is complete (written files synced, for the writing kinds). */
  finish(): Partial | Promise<Partial>;
}

export interface MapKinds {
  vocabulary: { setup: VocabularySetup; task: InputSplit; result: SplitResult; partial: VocabularyPartial };
  tokens: { setup: TokenSetup; task: InputSplit; result: TokenStreamRef; partial: Record<string, never> };
  terms: { setup: TermMergeSetup; task: TermRange; result: KeptTerms; partial: Record<string, never> };
  fold: { setup: Record<string, never>; task: FoldTask; result: TermRun; partial: Record<string, never> };
  chunk: { setup: ChunkSetup; task: ChunkTask; result: SliceCounts; partial: Record<string, never> };
  touch: { setup: TouchSetup; task: null; result: null; partial: Record<string, never> };
  gather: { setup: GatherSetup; task: GatherTask; result: null; partial: Record<string, never> };
  rows: { setup: RowsSetup; task: RowsTask; result: RowsResult; partial: RowsPartial };
  weight: { setup: WeightSetup; task: WeightTask; result: WeightResult; partial: Record<string, never> };
  merge: { setup: MergeSetup; task: MergeTask; result: MergeResult; partial: Record<string, never> };
}

export type MapKind = keyof MapKinds;

type AnyPartial = MapKinds[MapKind]['partial'];
type AnyMapper = Mapper<unknown, unknown, AnyPartial>;

/** Starts a mapper of the given kind (setup and tasks are as MapKinds says for that kind). */
export async function createMapper(kind: MapKind, setup: unknown): Promise<AnyMapper> {
  if (kind === 'vocabulary') {
    const m = await VocabularyMapper.create(setup as VocabularySetup);
    return { run: (t, p) => m.run(t as InputSplit, p), finish: () => m.finish() };
  }
  if (kind === 'tokens') {
    const m = await TokenMapper.create(setup as TokenSetup);
    return { run: (t, p) => m.run(t as InputSplit, p), finish: () => m.finish() };
  }
  if (kind === 'fold') {
    return { run: async (t, p) => foldRuns((t as FoldTask).runs, (t as FoldTask).file, p), finish: () => ({}) };
  }
  if (kind === 'terms') {
    const { runs, filter } = setup as TermMergeSetup;
    return { run: async (t, p) => mergeTermRange(runs, filter, (t as TermRange).lo, (t as TermRange).hi, p), finish: () => ({}) };
  }
  if (kind === 'weight') {
    // loaded only here: the Arrow reader and the schemes are not needed by the counting threads
    const { WeightMapper } = await import('../weight/map.js');
    const m = new WeightMapper(setup as WeightSetup);
    return { run: (t, p) => m.run(t as WeightTask, p), finish: () => m.finish() };
  }
  if (kind === 'merge') {
    const { MergeMapper } = await import('../count/merge-map.js');
    const m = new MergeMapper(setup as MergeSetup);
    return { run: (t, p) => m.run(t as MergeTask, p), finish: () => m.finish() };
  }
  if (kind === 'gather') {
    const m = new GatherMapper(setup as GatherSetup);
    return { run: (t) => m.run(t as GatherTask), finish: () => m.finish() };
  }
  if (kind === 'chunk') {
    const m = new ChunkMapper(setup as ChunkSetup);
    return { run: (t) => m.run(t as ChunkTask), finish: () => m.finish() };
  }
  if (kind === 'touch') {
    const m = new TouchMapper(setup as TouchSetup);
    return { run: () => m.run(), finish: () => m.finish() };
  }
  const m = new RowsMapper(setup as RowsSetup);
  return { run: (t, p) => m.run(t as RowsTask, p), finish: () => m.finish() };
}

/** The typed arrays of a partial, for a zero-copy hand-over between threads. */
export function transferablesOf(partial: AnyPartial): ArrayBuffer[] {
  if ('terms' in partial) return countTransferables(partial as VocabularyPartial);
  return ownBuffers(partial);
}

/** Typed arrays of a task result worth moving back rather than copying. */
export function resultTransferables(result: unknown): ArrayBuffer[] {
  return ownBuffers(result);
}

/** The buffers of the typed arrays among an object's fields (not shared memory, each once). */
function ownBuffers(value: unknown): ArrayBuffer[] {
  if (value === null || typeof value !== 'object') return [];
  const out: ArrayBuffer[] = [];
  for (const field of Object.values(value)) {
    if (ArrayBuffer.isView(field) && field.buffer instanceof ArrayBuffer && field.buffer.byteLength > 0 && !out.includes(field.buffer)) out.push(field.buffer);
  }
  return out;
}
