import path from 'node:path';
import type { KindredConfig } from '../config/types.js';
import type { Progress } from '../progress.js';
import type { RowRange } from '../count/partition.js';
import { ShardWriter, readShardBlocks, partFileName } from '../store/shards.js';
import { weightBlock, normalizeRows } from './index.js';
import type { Marginals } from './types.js';

/**
 * Reweights and normalizes each count shard into the matching weighted shard, streaming blocks of complete
 * rows, so memory is bounded by a record batch whatever the shard's size.
 */
export async function weightShards(cfg: KindredConfig, ranges: RowRange[], marginals: Marginals, workDir: string, progress: Progress): Promise<number[]> {
  progress.start('weight', ranges.length, 'parts');
  const entries: number[] = [];
  for (let i = 0; i < ranges.length; i++) {
    const writer = new ShardWriter(path.join(workDir, 'weighted', partFileName(i)), cfg.output.valueType);
    const countsFile = path.join(workDir, 'counts', partFileName(i));
    for await (const counts of readShardBlocks(countsFile, ranges[i].firstRow, ranges[i].endRow)) {
      writer.appendBlock(normalizeRows(weightBlock(counts, marginals, cfg.weighting), cfg.normalize));
    }
    await writer.close();
    entries.push(writer.entries);
    progress.update(i + 1);
  }
  progress.end(`${cfg.weighting.scheme}, ${cfg.normalize} rows, ${entries.reduce((a, b) => a + b, 0)} nonzero weights`);
  return entries;
}

