/**
 * The count stage's loading task, run in a worker thread or the main thread alike: a slice of a chunk read
 * into shared memory, its terms and document ends counted. See chunks.ts.
 */
import { fillSlice, type ChunkSlice, type ChunkSource, type SliceCounts } from './chunks.js';

export interface ChunkSetup {
  source: ChunkSource;
}

export interface ChunkTask {
  slice: ChunkSlice;
}

export class ChunkMapper {
  constructor(private readonly setup: ChunkSetup) {}

  async run(task: ChunkTask): Promise<SliceCounts> {
    return fillSlice(this.setup.source, task.slice);
  }

  finish(): Record<string, never> {
    return {};
  }
}
