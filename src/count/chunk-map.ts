/**
 * The count stage's loading task, run in a worker thread or the main thread alike: a slice of a chunk read
 * into shared memory, its terms and document ends counted. See chunks.ts. And the touching of that memory
 * ahead of its use (TouchMapper).
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

export interface TouchSetup {
  /** Fresh shared memory, not in use yet. */
  buffers: SharedArrayBuffer[];
  /** This thread touches share `part` of `parts` of each buffer. */
  part: number;
  parts: number;
}

/** Bytes of a memory page (the least the system uses). */
const PAGE = 4096;

/**
 * Writes a zero into every page of one share of fresh shared memory, so that the system maps the pages now, not
 * when the count stage first writes them: first touches cost about 3.5 ms per MiB on the virtual machines
 * measured (docs/performance.md), and a page touched by one thread is mapped for all. The work is done while
 * the thread sets up, so that it starts as soon as the setup is sent, even while the calling thread is busy;
 * the tasks do nothing.
 */
export class TouchMapper {
  constructor(setup: TouchSetup) {
    for (const buffer of setup.buffers) {
      const bytes = new Uint8Array(buffer);
      const pages = Math.ceil(bytes.length / PAGE);
      const from = Math.floor((pages * setup.part) / setup.parts) * PAGE;
      const to = Math.min(bytes.length, Math.floor((pages * (setup.part + 1)) / setup.parts) * PAGE);
      for (let at = from; at < to; at += PAGE) bytes[at] = 0;
    }
  }

  async run(): Promise<null> {
    return null;
  }

  finish(): Record<string, never> {
    return {};
  }
}
