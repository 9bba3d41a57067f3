/** Entry point of a worker thread of the local executor: one mapper, tasks from the parent, one partial back. */
import { parentPort } from 'node:worker_threads';
import { isKindredError } from '../errors.js';
import { createMapper, resultTransferables, transferablesOf } from './handlers.js';
import type { FromWorker, ToWorker } from './protocol.js';

const port = parentPort;
if (port === null) throw new Error('src/exec/worker.ts must run in a worker thread');

const PROGRESS_EVERY_BYTES = 1 << 22;

// The count stage's merge (and with it the Arrow writer) is loaded now, while the thread waits for its first
// task, rather than when the merge starts, where every thread would load it at once on the critical path (a
// failure to load shows there).
void import('../count/merge-map.js').catch(() => {});

let mapper: Awaited<ReturnType<typeof createMapper>> | null = null;
let pending = 0;
const send = (m: FromWorker, transfer: ArrayBuffer[] = []): void => port.postMessage(m, transfer);
const progress = (n: number): void => {
  pending += n;
  if (pending >= PROGRESS_EVERY_BYTES) {
    send({ type: 'progress', bytes: pending });
    pending = 0;
  }
};

async function handle(msg: ToWorker): Promise<void> {
  if (msg.type === 'setup') {
    mapper = await createMapper(msg.kind, msg.setup);
    send({ type: 'ready' });
  } else if (msg.type === 'task') {
    const result = await mapper!.run(msg.task, progress);
    if (pending > 0) send({ type: 'progress', bytes: pending });
    pending = 0;
    send({ type: 'result', index: msg.index, result }, resultTransferables(result));
  } else {
    const partial = await mapper!.finish();
    mapper = null;
    send({ type: 'partial', partial }, transferablesOf(partial));
  }
}

// Messages are handled strictly one after the other.
let queue = Promise.resolve();
port.on('message', (msg: ToWorker) => {
  queue = queue.then(() => handle(msg)).catch((e: unknown) => {
    const err = e instanceof Error ? e : new Error(String(e));
    send({ type: 'error', message: err.message, stack: err.stack, userError: isKindredError(e) });
  });
});
