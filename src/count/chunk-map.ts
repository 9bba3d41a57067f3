/**
 * The count stage's loading tasks, run in a worker thread or the main thread alike: a slice of a chunk read
 * into shared memory and its terms counted ('fill'), then its positions written at the slice's offsets
 * ('index'). See chunks.ts.
 */
import { fillSlice, indexSlice, type ChunkSlice, type ChunkSource, type SliceCounts } from './chunks.js';

export interface ChunkSetup {
  source: ChunkSource;
}

export type ChunkTask =
  | { phase: 'fill'; slice: ChunkSlice }
  | { phase: 'index'; slice: ChunkSlice; offsets: Int32Array; endOffset: number; positions: Int32Array; documentEnds: Int32Array };

/** A fill task's counts; nothing for an index task. */
export type ChunkResult = SliceCounts | null;

export class ChunkMapper {
  constructor(private readonly setup: ChunkSetup) {}

  async run(task: ChunkTask): Promise<ChunkResult> {
    if (task.phase === 'fill') return fillSlice(this.setup.source, task.slice);
    indexSlice(this.setup.source, task.slice, task.offsets, task.endOffset, task.positions, task.documentEnds);
    return null;
  }

  finish(): Record<string, never> {
    return {};
  }
}
