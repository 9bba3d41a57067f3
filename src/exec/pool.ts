/**
 * The local executor: runs map tasks on `workers` worker threads (one mapper each, tasks handed out in order
 * as threads free up), or in the calling thread when one worker is asked for. Results come back in task order;
 * each mapper's partial result comes back once, at the end. Whatever the thread count, the caller gets the
 * same task results and partials that sum to the same totals, so outputs do not depend on it.
 */
import { AsyncLocalStorage } from 'node:async_hooks';
import { existsSync } from 'node:fs';
import os from 'node:os';
import { fileURLToPath } from 'node:url';
import { Worker } from 'node:worker_threads';
import { KindredError } from '../errors.js';
import { createMapper, type MapKind, type MapKinds } from './handlers.js';
import type { FromWorker, ToWorker } from './protocol.js';

export interface MapRun<K extends MapKind> {
  results: MapKinds[K]['result'][];
  partials: MapKinds[K]['partial'][];
  /** Threads that ran mappers (1 = the calling thread). */
  threads: number;
}

/** The worker count a config asks for: 0 means one per CPU core. */
export function resolveWorkers(workers: number): number {
  return workers > 0 ? workers : Math.max(1, os.availableParallelism());
}

/**
 * The compiled worker entry. Under a TypeScript test runner this module is src/exec/pool.ts and the worker is
 * taken from dist/ (built by `npm run build`, which `npm test` runs first); null when it is not there.
 */
function workerFile(): string | null {
  const here = import.meta.url;
  const url = here.endsWith('.ts') ? new URL('../../dist/exec/worker.js', here) : new URL('./worker.js', here);
  const file = fileURLToPath(url);
  return existsSync(file) ? file : null;
}

/**
 * Threads kept between map runs: the passes of one build reuse them instead of starting threads (and loading
 * modules) again for every pass. A thread that failed is never returned.
 */
class ThreadPool {
  private readonly idle: Worker[] = [];
  private readonly all = new Set<Worker>();

  take(n: number, file: string): Worker[] {
    const out = this.idle.splice(0, n);
    while (out.length < n) out.push(this.start(file));
    return out;
  }

  /** Starts n threads ahead of the first run, so their start-up overlaps the work before it. */
  prestart(n: number, file: string): void {
    while (this.all.size < n) this.idle.push(this.start(file));
  }

  private start(file: string): Worker {
    const w = new Worker(file);
    this.all.add(w);
    // a thread that dies while idle is dropped; while in a run, the run's own listeners report it
    w.on('error', () => undefined);
    w.once('exit', () => {
      this.all.delete(w);
      const i = this.idle.indexOf(w);
      if (i >= 0) this.idle.splice(i, 1);
    });
    return w;
  }

  give(w: Worker): void {
    this.idle.push(w);
  }

  async close(): Promise<void> {
    await Promise.all([...this.all].map((w) => w.terminate()));
    this.all.clear();
    this.idle.length = 0;
  }
}

const pools = new AsyncLocalStorage<ThreadPool>();

/**
 * Runs fn with one pool of threads shared by every runMap inside it; the threads end with it. `prestart` threads
 * are started at once (none when the work runs in the calling thread).
 */
export async function withThreadPool<T>(fn: () => Promise<T>, prestart = 0): Promise<T> {
  const pool = new ThreadPool();
  const file = workerFile();
  if (prestart > 1 && file !== null) pool.prestart(prestart, file);
  try {
    return await pools.run(pool, fn);
  } finally {
    await pool.close();
  }
}

export async function runMap<K extends MapKind>(
  kind: K,
  setupFor: (mapper: number) => MapKinds[K]['setup'],
  tasks: MapKinds[K]['task'][],
  workers: number,
  onProgress: (bytes: number) => void = () => {},
): Promise<MapRun<K>> {
  const file = workerFile();
  const threads = Math.max(1, Math.min(workers, tasks.length));
  if (threads === 1 || file === null) return runInThisThread(kind, setupFor(0), tasks, onProgress);
  return runOnThreads(kind, setupFor, tasks, threads, file, onProgress);
}

async function runInThisThread<K extends MapKind>(
  kind: K, setup: MapKinds[K]['setup'], tasks: MapKinds[K]['task'][], onProgress: (bytes: number) => void,
): Promise<MapRun<K>> {
  const mapper = await createMapper(kind, setup);
  const results: MapKinds[K]['result'][] = [];
  for (const task of tasks) results.push((await mapper.run(task, onProgress)) as MapKinds[K]['result']);
  return { results, partials: [(await mapper.finish()) as MapKinds[K]['partial']], threads: 1 };
}

function runOnThreads<K extends MapKind>(
  kind: K, setupFor: (mapper: number) => MapKinds[K]['setup'], tasks: MapKinds[K]['task'][], threads: number,
  file: string, onProgress: (bytes: number) => void,
): Promise<MapRun<K>> {
  return new Promise((resolve, reject) => {
    const results = new Array<MapKinds[K]['result']>(tasks.length);
    const partials = new Array<MapKinds[K]['partial']>(threads);
    const shared = pools.getStore();
    const pool: Worker[] = shared ? shared.take(threads, file) : Array.from({ length: threads }, () => new Worker(file));
    const detach: (() => void)[] = [];
    let next = 0;
    let finished = 0;
    let failed = false;
    const fail = (e: Error): void => {
      if (failed) return;
      failed = true;
      for (const d of detach) d();
      for (const w of pool) void w.terminate();
      reject(e);
    };
    const send = (w: Worker, m: ToWorker, transfer: ArrayBuffer[] = []): void => w.postMessage(m, transfer);
    const dispatch = (w: Worker): void => {
      if (next < tasks.length) {
        const index = next++;
        send(w, { type: 'task', index, task: tasks[index] });
      } else {
        send(w, { type: 'finish' });
      }
    };
    for (let m = 0; m < threads; m++) {
      const w = pool[m];
      const onMessage = (msg: FromWorker): void => {
        if (failed) return;
        switch (msg.type) {
          case 'ready':
            dispatch(w);
            break;
          case 'progress':
            onProgress(msg.bytes);
            break;
          case 'result':
            results[msg.index] = msg.result as MapKinds[K]['result'];
            dispatch(w);
            break;
          case 'partial':
            partials[m] = msg.partial as MapKinds[K]['partial'];
            detach[m]();
            if (shared) shared.give(w);
            else void w.terminate();
            if (++finished === threads) resolve({ results, partials, threads });
            break;
          case 'error': {
            const err = msg.userError ? new KindredError(msg.message) : new Error(`worker thread ${m}: ${msg.message}`);
            if (!msg.userError && msg.stack) err.stack = msg.stack;
            fail(err);
            break;
          }
        }
      };
      const onError = (e: unknown): void => fail(e instanceof Error ? e : new Error(String(e)));
      const onExit = (code: number): void => {
        if (partials[m] === undefined && !failed) fail(new Error(`worker thread ${m} exited with code ${code} before it finished`));
      };
      w.on('message', onMessage);
      w.on('error', onError);
      w.on('exit', onExit);
      detach[m] = () => {
        w.off('message', onMessage);
        w.off('error', onError);
        w.off('exit', onExit);
      };
      send(w, { type: 'setup', kind, setup: setupFor(m) });
    }
  });
}
