import path from 'node:path';
import type { KindredConfig } from '../config/types.js';
import type { Progress } from '../progress.js';
import type { RowRange } from '../count/partition.js';
import { partFileName } from '../store/shards.js';
import { runMap } from '../exec/pool.js';
import type { Marginals } from './types.js';
import type { FileChecksum } from '../store/arrow-sink.js';

/**
 * Reweights and normalizes each count shard into the matching weighted shard, one part per task on `workers`
 * threads (parts are independent given the marginals), each streamed in blocks of complete rows, so memory is
 * bounded by a record batch per thread whatever the shard's size.
 */
export async function weightShards(
  cfg: KindredConfig, ranges: RowRange[], marginals: Marginals, workDir: string, progress: Progress, workers = 1,
): Promise<{ entries: number[]; checksums: FileChecksum[] }> {
  progress.start('weight', ranges.length, 'parts');
  let done = 0;
  const tasks = ranges.map((r, i) => ({
    countsFile: path.join(workDir, 'counts', partFileName(i)),
    outFile: path.join(workDir, 'weighted', partFileName(i)),
    firstRow: r.firstRow,
    endRow: r.endRow,
  }));
  const run = await runMap('weight', () => ({ weighting: cfg.weighting, normalize: cfg.normalize, valueType: cfg.output.valueType, marginals }),
    tasks, workers, (n) => progress.update((done += n)));
  const entries = run.results.map((r) => r.entries);
  progress.end(`${cfg.weighting.scheme}, ${cfg.normalize} rows, ${entries.reduce((a, b) => a + b, 0)} nonzero weights (${run.threads} thread${run.threads > 1 ? 's' : ''})`);
  return { entries, checksums: run.results.map((r) => r.checksum) };
}
