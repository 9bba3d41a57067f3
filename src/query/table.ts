/**
 * Neighbour tables: the k nearest terms of each of the first `queries` terms (ids are by descending frequency,
 * so these are the most frequent terms), searched exactly among all terms. Queries run in blocks, on worker threads
 * that share the matrix through SharedArrayBuffers, or in this thread; blocks are handed out as workers free up
 * and delivered in query order, so the output does not depend on the number of workers.
 */
import { existsSync } from 'node:fs';
import { fileURLToPath } from 'node:url';
import { Worker } from 'node:worker_threads';
import { NeighborSearcher, type SearchData } from './search.js';

/** Neighbours of the queries [first, end): query first + i has counts[i] neighbours, concatenated in ids/distances. */
export interface TableBlock {
  first: number;
  end: number;
  counts: Uint32Array;
  ids: Int32Array;
  distances: Float64Array;
  /** Queries whose own row or vector is empty (no neighbours listed). */
  empty: number;
}

/** Searches the queries [first, end) with one searcher. */
export function searchBlock(searcher: NeighborSearcher, first: number, end: number, k: number): TableBlock {
  const counts = new Uint32Array(end - first);
  const ids: Int32Array[] = [];
  const dists: Float64Array[] = [];
  let total = 0;
  let empty = 0;
  const results = searcher.searchRange(first, end, k);
  for (let q = first; q < end; q++) {
    if (searcher.isEmpty(q)) {
      empty++;
      continue;
    }
    const r = results[q - first];
    counts[q - first] = r.count;
    ids.push(r.ids);
    dists.push(r.distances);
    total += r.count;
  }
  const outIds = new Int32Array(total);
  const outDist = new Float64Array(total);
  let at = 0;
  for (let i = 0; i < ids.length; i++) {
    outIds.set(ids[i], at);
    outDist.set(dists[i], at);
    at += ids[i].length;
  }
  return { first, end, counts, ids: outIds, distances: outDist, empty };
}

export interface TableOptions {
  measure: string;
  k: number;
  /** Terms [0, queries) get a list. */
  queries: number;
  /** Worker threads; 1 runs in this thread. */
  workers: number;
  /** Queries per block (default: about 16 blocks per worker, at most 256 queries). */
  blockSize?: number;
  /** The compiled worker module; default: table-worker.js beside this module, when it exists. */
  workerScript?: URL;
  onProgress?: (queriesDone: number) => void;
}

/** Whether the data's arrays live in SharedArrayBuffers (needed to hand them to workers without copies). */
export function isShared(data: SearchData): boolean {
  const arrays = data.kind === 'rows'
    ? [data.rows.indptr, data.rows.cols, data.rows.values, data.columns.indptr, data.columns.rows, data.columns.values]
    : [data.vectors.data];
  return arrays.every((a) => a.buffer instanceof SharedArrayBuffer);
}

/**
 * The compiled worker module, or null when it is not there. Under a TypeScript test runner this module is
 * src/query/table.ts and the worker is taken from dist/ (built by `npm run build`, which `npm test` runs first).
 */
export function defaultWorkerScript(): URL | null {
  const here = import.meta.url;
  const url = here.endsWith('.ts') ? new URL('../../dist/query/table-worker.js', here) : new URL('./table-worker.js', here);
  return existsSync(fileURLToPath(url)) ? url : null;
}

/**
 * Computes the table and hands each block to `sink` in query order (the sink may be async: blocks wait for it).
 * Returns the number of queries whose own row was empty.
 */
export async function computeNeighborTable(data: SearchData, opts: TableOptions, sink: (block: TableBlock) => Promise<void> | void): Promise<{ empty: number; workersUsed: number }> {
  const { k, queries } = opts;
  const script = opts.workerScript ?? defaultWorkerScript();
  const workers = script && isShared(data) ? Math.max(1, Math.min(opts.workers, Math.ceil(queries / 32))) : 1;
  const blockSize = opts.blockSize ?? Math.max(1, Math.min(256, Math.ceil(queries / (workers * 16))));
  let empty = 0;
  let done = 0;
  if (workers <= 1 || !script) {
    const searcher = new NeighborSearcher(data, opts.measure);
    for (let first = 0; first < queries; first += blockSize) {
      const block = searchBlock(searcher, first, Math.min(queries, first + blockSize), k);
      empty += block.empty;
      done += block.end - block.first;
      await sink(block);
      opts.onProgress?.(done);
    }
    return { empty, workersUsed: 1 };
  }

  const pool = Array.from({ length: workers }, () => new Worker(script, { workerData: { data, measure: opts.measure, k } }));
  try {
    await new Promise<void>((resolve, reject) => {
      let nextFirst = 0;
      let nextToWrite = 0;
      let failed = false;
      let writing = Promise.resolve();
      const ready = new Map<number, TableBlock>();
      const fail = (e: unknown): void => {
        if (failed) return;
        failed = true;
        reject(e);
      };
      const dispatch = (w: Worker): boolean => {
        if (nextFirst >= queries) return false;
        const first = nextFirst;
        nextFirst = Math.min(queries, first + blockSize);
        w.postMessage({ first, end: nextFirst });
        return true;
      };
      let busy = 0;
      const flush = (): void => {
        // deliver blocks in query order; a block that arrives early waits in `ready`
        while (ready.has(nextToWrite)) {
          const block = ready.get(nextToWrite) as TableBlock;
          ready.delete(nextToWrite);
          nextToWrite = block.end;
          writing = writing.then(async () => {
            empty += block.empty;
            done += block.end - block.first;
            await sink(block);
            opts.onProgress?.(done);
          });
        }
        if (busy === 0 && nextToWrite >= queries) writing.then(resolve, fail);
      };
      for (const w of pool) {
        w.on('message', (block: TableBlock) => {
          if (failed) return;
          busy--;
          ready.set(block.first, block);
          if (dispatch(w)) busy++;
          flush();
          writing.catch(fail);
        });
        w.on('error', fail);
        w.on('exit', (code) => {
          if (code !== 0) fail(new Error(`neighbour table worker exited with code ${code}`));
        });
        if (dispatch(w)) busy++;
      }
      if (queries === 0) resolve();
    });
  } finally {
    await Promise.all(pool.map((w) => w.terminate()));
  }
  return { empty, workersUsed: workers };
}
