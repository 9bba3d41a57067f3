/**
 * The vectors stage of a build: truncated SVD of the weighted shards, term vectors U·Σ^p written to vectors.arrow.
 * A function of (config, the weighted shards, the vocabulary), so the build decides where it runs and how it is keyed.
 */
import path from 'node:path';
import type { VectorsConfig } from '../config/types.js';
import { KindredError } from '../errors.js';
import { silentProgress, type Progress } from '../progress.js';
import { readShard } from '../store/shards.js';
import type { RowBlock } from '../weight/types.js';
import type { RowSource } from './sparse-products.js';
import { sketchWidth, svdPasses, svdWorkingBytes, truncatedSvd, weightedLeftVectors } from './svd.js';
import { VECTORS_FILE, writeVectors } from './vectors-file.js';

/** One weighted shard on disk with its row range. */
export interface ShardPart {
  file: string;
  firstRow: number;
  endRow: number;
  /** Entries in the shard, when known (for the memory estimate). */
  entries?: number;
}

/** Reads every shard again on every pass: memory holds one shard at a time. */
export function shardSource(parts: readonly ShardPart[], nRows: number, nCols: number): RowSource {
  return {
    nRows,
    nCols,
    forEachBlock(visit) {
      for (const p of parts) visit(readShard(p.file, p.firstRow, p.endRow));
    },
  };
}

/** Reads every shard once and keeps the blocks. */
function cachedSource(parts: readonly ShardPart[], nRows: number, nCols: number): RowSource {
  const blocks: RowBlock[] = parts.map((p) => readShard(p.file, p.firstRow, p.endRow));
  return { nRows, nCols, forEachBlock: (visit) => blocks.forEach((b) => visit(b)) };
}

/** What the manifest records about the vectors. */
export interface VectorsRecord {
  file: string;
  rows: number;
  dimensions: number;
  exponent: number;
  oversampling: number;
  powerIterations: number;
  seed: number;
  /** Columns of the random sketch actually used: min(dimensions + oversampling, rows, columns). */
  sketchWidth: number;
  passes: number;
  /** Whether the shards were held in memory across passes (they fit the budget) or read again on each pass. */
  shardsInMemory: boolean;
  /** The leading singular values of the weighted matrix, descending. */
  singularValues: number[];
  /** Σ σ_j² over the kept values divided by the squared Frobenius norm of the weighted matrix. */
  energyCaptured: number;
}

/** Inputs of the stage, as the build knows them. */
export interface VectorsStageInput {
  /** Folder the vectors file is written to. */
  outDir: string;
  parts: readonly ShardPart[];
  nRows: number;
  nCols: number;
  terms: readonly string[];
  memoryMiB: number;
}

/** Bytes one decoded shard takes while it is being read (Arrow columns plus the row block), per entry. */
const BYTES_PER_READ_ENTRY = 40;
/** Bytes a cached row block keeps per entry (uint32 column, float64 value). */
const BYTES_PER_CACHED_ENTRY = 12;

/** Throws a KindredError naming the keys to change when the settings cannot work on this matrix. */
export function checkVectorSettings(v: VectorsConfig, nRows: number, nCols: number, memoryMiB: number, largestShardEntries: number): void {
  const limit = Math.min(nRows, nCols);
  if (v.dimensions > limit) {
    throw new KindredError(
      `vectors.dimensions: ${v.dimensions} is more than the weighted matrix allows (${nRows} rows, ${nCols} columns, so at most ${limit}); lower vectors.dimensions`,
    );
  }
  const need = svdWorkingBytes(nRows, nCols, v.dimensions, v.oversampling) + largestShardEntries * BYTES_PER_READ_ENTRY;
  const budget = memoryMiB * 1024 * 1024;
  if (need > budget) {
    throw new KindredError(
      `vectors: the SVD of ${nRows} rows × ${nCols} columns with vectors.dimensions=${v.dimensions} and vectors.oversampling=${v.oversampling} ` +
        `needs about ${Math.ceil(need / 1048576)} MiB, above memoryMiB=${memoryMiB}; lower vectors.dimensions or vectors.oversampling, or raise memoryMiB`,
    );
  }
}

export async function runVectorsStage(v: VectorsConfig, input: VectorsStageInput, progress: Progress = silentProgress): Promise<VectorsRecord> {
  const { nRows, nCols, parts } = input;
  const entries = parts.map((p) => p.entries ?? 0);
  const largest = Math.max(0, ...entries);
  checkVectorSettings(v, nRows, nCols, input.memoryMiB, largest);
  const working = svdWorkingBytes(nRows, nCols, v.dimensions, v.oversampling);
  const cacheBytes = entries.reduce((a, b) => a + b, 0) * BYTES_PER_CACHED_ENTRY + (nRows + parts.length) * 4;
  const inMemory = parts.every((p) => p.entries !== undefined) && working + cacheBytes + largest * BYTES_PER_READ_ENTRY <= input.memoryMiB * 1048576;
  const base = inMemory ? cachedSource(parts, nRows, nCols) : shardSource(parts, nRows, nCols);

  // the squared Frobenius norm, summed on the first pass, for the share of it the vectors capture
  let frobenius = 0;
  let firstPass = true;
  const source: RowSource = {
    nRows,
    nCols,
    forEachBlock(visit) {
      base.forEachBlock((b) => {
        if (firstPass) for (let p = 0; p < b.values.length; p++) frobenius += b.values[p] * b.values[p];
        visit(b);
      });
      firstPass = false;
    },
  };

  progress.start('vectors', svdPasses(v.powerIterations), 'passes');
  const svd = truncatedSvd(source, {
    rank: v.dimensions,
    oversampling: v.oversampling,
    powerIterations: v.powerIterations,
    seed: v.seed,
    onPass: (done) => progress.update(done),
  });
  const vectors = weightedLeftVectors(svd, v.exponent);
  const file = path.join(input.outDir, VECTORS_FILE);
  await writeVectors(file, input.terms, vectors, v.dimensions);
  let captured = 0;
  for (const s of svd.singularValues) captured += s * s;
  const energy = frobenius > 0 ? captured / frobenius : 0;
  progress.end(`${nRows} terms × ${v.dimensions} dimensions, σ₁ = ${svd.singularValues[0].toPrecision(6)}, ${(100 * energy).toFixed(1)}% of the squared norm`);
  return {
    file: VECTORS_FILE,
    rows: nRows,
    dimensions: v.dimensions,
    exponent: v.exponent,
    oversampling: v.oversampling,
    powerIterations: v.powerIterations,
    seed: v.seed,
    sketchWidth: sketchWidth(nRows, nCols, v.dimensions, v.oversampling),
    passes: svd.passes,
    shardsInMemory: inMemory,
    singularValues: Array.from(svd.singularValues),
    energyCaptured: energy,
  };
}
