/**
 * The weight stage's map task, run in a worker thread or the main thread alike: one count part in, its weighted
 * and normalized part out, streamed in blocks of complete rows. Parts are independent given the marginals, so
 * the output does not depend on which thread weighted which part.
 */
import type { Normalization, WeightingConfig } from '../config/types.js';
import type { ShardValueType } from '../store/shards.js';
import { ShardWriter, Syncing, readShardBlocks } from '../store/shards.js';
import type { FileChecksum } from '../store/arrow-sink.js';
import { weightAndNormalizeInPlace } from './index.js';
import type { Marginals } from './types.js';

export interface WeightSetup {
  weighting: WeightingConfig;
  normalize: Normalization;
  valueType: ShardValueType;
  marginals: Marginals;
}

export interface WeightTask {
  countsFile: string;
  outFile: string;
  firstRow: number;
  endRow: number;
}

export interface WeightResult {
  entries: number;
  /** Size and SHA-256 of the weighted shard, taken as it was written. */
  checksum: FileChecksum;
}

export class WeightMapper {
  /** The written shards' syncs to disk, waited for at the end (a part's sync overlaps the next part's work). */
  private readonly syncing = new Syncing();

  constructor(private readonly setup: WeightSetup) {}

  async run(task: WeightTask, onProgress: (parts: number) => void): Promise<WeightResult> {
    const { weighting, normalize, valueType, marginals } = this.setup;
    const writer = new ShardWriter(task.outFile, valueType);
    for await (const counts of readShardBlocks(task.countsFile, task.firstRow, task.endRow)) {
      // each block is read afresh and used once: weighted where it lies
      writer.appendBlock(weightAndNormalizeInPlace(counts, marginals, weighting, normalize));
    }
    this.syncing.add(writer.end());
    onProgress(1);
    return { entries: writer.entries, checksum: writer.checksum! };
  }

  /** Once every shard it wrote is on disk. */
  async finish(): Promise<Record<string, never>> {
    await this.syncing.done();
    return {};
  }
}
