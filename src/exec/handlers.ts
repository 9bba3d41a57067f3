/** The kinds of map task the local executor runs, and how a thread (or the main thread) starts each. */
import type { InputSplit } from '../ingest/split.js';
import {
  PairsMapper, VocabularyMapper, transferablesOf,
  type PairsPartial, type PairsSetup, type PairsTask, type ReadSetup, type SplitResult, type VocabularyPartial,
} from '../count/map.js';

/** One mapper: runs tasks one after the other, then hands over its accumulated partial result. */
export interface Mapper<Task, Result, Partial> {
  run(task: Task, onProgress: (bytes: number) => void): Promise<Result>;
  finish(): Partial;
}

export interface MapKinds {
  vocabulary: { setup: ReadSetup; task: InputSplit; result: SplitResult; partial: VocabularyPartial };
  pairs: { setup: PairsSetup; task: PairsTask; result: SplitResult; partial: PairsPartial };
}

export type MapKind = keyof MapKinds;

type AnyMapper = Mapper<unknown, unknown, VocabularyPartial | PairsPartial>;

/** Starts a mapper of the given kind (setup and tasks are as MapKinds says for that kind). */
export async function createMapper(kind: MapKind, setup: unknown): Promise<AnyMapper> {
  if (kind === 'vocabulary') {
    const m = await VocabularyMapper.create(setup as ReadSetup);
    return { run: (t, p) => m.run(t as InputSplit, p), finish: () => m.finish() };
  }
  const m = await PairsMapper.create(setup as PairsSetup);
  return { run: (t, p) => m.run(t as PairsTask, p), finish: () => m.finish() };
}

export { transferablesOf };
