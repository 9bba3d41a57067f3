/**
 * The neighbour-table stage of a build: exact top-k neighbours of the chosen terms, on the weighted rows or on the
 * vectors, written to neighbors.arrow. A function of (settings, its input files), so the build decides where it runs
 * and how it is keyed.
 */
import os from 'node:os';
import path from 'node:path';
import type { NeighborsConfig } from '../config/types.js';
import { KindredError } from '../errors.js';
import { getMeasure } from '../measures/index.js';
import { silentProgress, type Progress } from '../progress.js';
import { readVectors } from '../reduce/vectors-file.js';
import { denseFromFloat32, readWeightedMatrix, transpose, type WeightedPart } from './matrix.js';
import { NEIGHBORS_FILE, NeighborTableWriter } from './neighbors-file.js';
import { scoreDefinition } from './score.js';
import type { SearchData } from './search.js';
import { computeNeighborTable } from './table.js';

/** What the manifest records about the neighbour table. */
export interface NeighborsRecord {
  file: string;
  measure: string;
  k: number;
  source: 'rows' | 'vectors';
  /** Terms that were asked for a list: ids [0, queried). */
  queried: number;
  /** Of those, terms whose own row (or vector) is empty and so have no list. */
  emptyRows: number;
  /** Rows of the table. */
  rows: number;
  /** How the score column derives from the distance column. */
  score: string;
  /** Worker threads that searched. */
  workers: number;
}

export interface NeighborsStageInput {
  /** Folder neighbors.arrow is written to. */
  outDir: string;
  terms: readonly string[];
  /** For source "rows": the build folder holding the weighted shards, their records, and the matrix shape. */
  rows?: { dir: string; parts: readonly WeightedPart[]; nRows: number; nCols: number };
  /** For source "vectors": the vectors.arrow file. */
  vectorsFile?: string;
  /** Worker threads (default: the machine's available parallelism). */
  workers?: number;
  /** The compiled worker module (tests running TypeScript sources point at dist/). */
  workerScript?: URL;
}

/** Loads what the table searches over, in shared memory when workers will read it. */
export function loadSearchData(n: Pick<NeighborsConfig, 'source'>, input: NeighborsStageInput, shared: boolean): SearchData {
  if (n.source === 'vectors') {
    if (!input.vectorsFile) throw new KindredError('neighbors.source "vectors" needs vectors.arrow; set vectors.enabled to true');
    const v = readVectors(input.vectorsFile);
    return { kind: 'vectors', vectors: denseFromFloat32(v.data, v.terms.length, v.dim, shared) };
  }
  if (!input.rows) throw new Error('neighbour table on rows: the weighted shards were not given');
  const r = input.rows;
  const rows = readWeightedMatrix(r.dir, r.parts, r.nRows, r.nCols, shared);
  return { kind: 'rows', rows, columns: transpose(rows, shared) };
}

export async function runNeighborsStage(n: NeighborsConfig, input: NeighborsStageInput, progress: Progress = silentProgress): Promise<NeighborsRecord> {
  const measure = getMeasure(n.measure);
  const size = input.terms.length;
  const queried = n.terms === 0 ? size : Math.min(n.terms, size);
  const workers = Math.max(1, input.workers ?? os.availableParallelism());
  const data = loadSearchData(n, input, workers > 1);
  const writer = new NeighborTableWriter(path.join(input.outDir, NEIGHBORS_FILE), input.terms, measure.name);
  progress.start('neighbors', queried, 'terms');
  let result: { empty: number; workersUsed: number };
  try {
    result = await computeNeighborTable(
      data,
      { measure: measure.name, k: n.k, queries: queried, workers, workerScript: input.workerScript, onProgress: (d) => progress.update(d) },
      (block) => writer.append(block),
    );
  } finally {
    await writer.close();
  }
  progress.end(`${queried} terms, k = ${n.k}, ${measure.name} on ${n.source}, ${writer.rows} rows (${result.workersUsed} worker${result.workersUsed === 1 ? '' : 's'})`);
  return {
    file: NEIGHBORS_FILE,
    measure: measure.name,
    k: n.k,
    source: n.source,
    queried,
    emptyRows: result.empty,
    rows: writer.rows,
    score: scoreDefinition(measure.name),
    workers: result.workersUsed,
  };
}
