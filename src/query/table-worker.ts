/** Worker thread of computeNeighborTable: searches the query blocks it is sent over the shared matrix. */
import { parentPort, workerData } from 'node:worker_threads';
import { NeighborSearcher, type SearchData } from './search.js';
import { searchBlock } from './table.js';

interface Setup {
  data: SearchData;
  measure: string;
  k: number;
}

const setup = workerData as Setup;
const searcher = new NeighborSearcher(setup.data, setup.measure);
const port = parentPort;
if (!port) throw new Error('table-worker.js must run as a worker thread');
port.on('message', (msg: { first: number; end: number }) => {
  const block = searchBlock(searcher, msg.first, msg.end, setup.k);
  port.postMessage(block, [block.counts.buffer as ArrayBuffer, block.ids.buffer as ArrayBuffer, block.distances.buffer as ArrayBuffer]);
});
