// The count stage's mirrored merge (src/count/merge-map.ts): R's runs and the Rᵀ entries of the mirror file,
// merged into the rows of R + Rᵀ. Checked against the sum computed by definition in a dense matrix here, with
// output and mirror buffers from one record up, so that the merge stops for a full buffer and for loading the next
// rows everywhere (between rows, inside a row, inside a cell's sum), and against itself with large buffers.
import { describe, it, expect, afterAll } from 'vitest';
import { mkdtempSync, rmSync, readFileSync } from 'node:fs';
import { createHash } from 'node:crypto';
import os from 'node:os';
import path from 'node:path';
import { RunWriter, MirrorWriter } from '../src/count/runs.js';
import { MergeMapper, type MergeSetup, type MergeTask } from '../src/count/merge-map.js';
import { readArrowTable } from '../src/store/shards.js';
import { mulberry32 } from './helpers/random.js';
import type { Marginals } from '../src/weight/types.js';
import { weightAndNormalizeInPlace } from '../src/weight/index.js';

const work = mkdtempSync(path.join(os.tmpdir(), 'kindred-merge-mirror-'));
afterAll(() => rmSync(work, { recursive: true, force: true }));

/** A random n × n matrix R of small integer counts (some rows empty), as dense rows. */
function randomR(n: number, density: number, seed: number): Float64Array[] {
  const next = mulberry32(seed);
  const r: Float64Array[] = [];
  for (let w = 0; w < n; w++) {
    const row = new Float64Array(n);
    const d = next() < 0.15 ? 0 : density * (0.2 + next());
    for (let c = 0; c < n; c++) if (next() < d) row[c] = 1 + Math.floor(next() * 120);
    r.push(row);
  }
  return r;
}

interface Written {
  runs: string[];
  mirrorFile: string;
  segments: { file: string; start: number; count: number }[];
  nnz: Uint32Array;
}

/**
 * Writes R as the count tasks do: rows in tasks of `rowsPerTask`, each task's rows to its own run (row, col,
 * value), and every cell as (col, row, value) to one mirror file bound for part 0, in segments of 7 records
 * (so that a row's cells fill the buffer many times).
 */
function writeR(dir: string, R: Float64Array[], rowsPerTask: number): Written {
  const n = R.length;
  const runs: string[] = [];
  const mirrorFile = path.join(dir, 'mirror.bin');
  const mirror = new MirrorWriter(mirrorFile, 1, 7);
  const segments: Written['segments'] = [];
  const nnz = new Uint32Array(n);
  const partOf = new Int32Array(n);
  for (let first = 0; first < n; first += rowsPerTask) {
    const file = path.join(dir, `run-${first}.bin`);
    const run = new RunWriter(file);
    for (let w = first; w < Math.min(n, first + rowsPerTask); w++) {
      const cols: number[] = [];
      for (let c = 0; c < n; c++) {
        if (R[w][c] === 0) continue;
        run.append(w, c, R[w][c]);
        cols.push(c);
        nnz[c]++;
      }
      // as the count tasks write a row: its columns, and its values by column
      mirror.appendRow(w, Uint32Array.from(cols), R[w], partOf);
    }
    run.close();
    runs.push(file);
    for (const s of mirror.endTask()) segments.push({ file: mirrorFile, start: s.start, count: s.count });
  }
  mirror.close();
  return { runs, mirrorFile, segments, nnz };
}

/** R + Rᵀ by definition, as (row, col, value / scale) in row-major order. */
function expectedCells(R: Float64Array[], scale: number): { rows: number[]; cols: number[]; values: number[] } {
  const out = { rows: [] as number[], cols: [] as number[], values: [] as number[] };
  for (let w = 0; w < R.length; w++) {
    for (let c = 0; c < R.length; c++) {
      const v = R[w][c] + R[c][w];
      if (v === 0) continue;
      out.rows.push(w);
      out.cols.push(c);
      out.values.push(v / scale);
    }
  }
  return out;
}

/** Row and column sums of R + Rᵀ (scaled, as the count tasks hand them on), as marginals in counts. */
function marginalsOf(R: Float64Array[], scale: number): Marginals {
  const n = R.length;
  const rowSums = new Float64Array(n);
  const rowNnz = new Uint32Array(n);
  let total = 0;
  for (let w = 0; w < n; w++) {
    for (let c = 0; c < n; c++) {
      const v = R[w][c] + R[c][w];
      rowSums[w] += v;
      if (v !== 0) rowNnz[w]++;
    }
    total += rowSums[w];
  }
  return { nRows: n, nCols: n, rowSums: rowSums.map((v) => v / scale), colSums: rowSums.map((v) => v / scale), total: total / scale, rowNnz };
}

const PPMI = { scheme: 'ppmi', smoothing: 0.75, shift: 1, logBase: '2', tf: 'raw', idf: 'plain' } as const;

/**
 * The weighted shard's cells: R + Rᵀ weighted and normalized whole by the weighting the weight stage uses (checked
 * against numpy/scipy in test/weight-*.test.ts), as float32.
 */
function expectedWeighted(R: Float64Array[], scale: number): { rows: number[]; cols: number[]; values: number[] } {
  const cells = expectedCells(R, scale);
  const indptr = new Uint32Array(R.length + 1);
  for (const r of cells.rows) indptr[r + 1]++;
  for (let r = 0; r < R.length; r++) indptr[r + 1] += indptr[r];
  const block = weightAndNormalizeInPlace(
    { firstRow: 0, indptr, cols: Uint32Array.from(cells.cols), values: Float64Array.from(cells.values) }, marginalsOf(R, scale), PPMI, 'l2',
  );
  const out = { rows: [] as number[], cols: [] as number[], values: [] as number[] };
  for (let r = 0; r < R.length; r++) {
    for (let p = block.indptr[r]; p < block.indptr[r + 1]; p++) {
      out.rows.push(r);
      out.cols.push(block.cols[p]);
      out.values.push(Math.fround(block.values[p]));
    }
  }
  return out;
}

function cellsOf(file: string): { rows: number[]; cols: number[]; values: number[] } {
  const table = readArrowTable(file);
  return {
    rows: Array.from(table.getChild('row')!.toArray() as Uint32Array),
    cols: Array.from(table.getChild('col')!.toArray() as Uint32Array),
    values: Array.from(table.getChild('value')!.toArray() as Float64Array | Float32Array),
  };
}

type Cells = { rows: number[]; cols: number[]; values: number[] };

/** Where two lists of cells first differ (null: the same cells, values to the bit). */
function firstDifference(got: Cells, want: Cells): string | null {
  if (got.rows.length !== want.rows.length) return `${got.rows.length} cells, ${want.rows.length} expected`;
  for (let i = 0; i < want.rows.length; i++) {
    if (got.rows[i] !== want.rows[i] || got.cols[i] !== want.cols[i] || !Object.is(got.values[i], want.values[i])) {
      return `cell ${i}: (${got.rows[i]}, ${got.cols[i]}, ${got.values[i]}), expected (${want.rows[i]}, ${want.cols[i]}, ${want.values[i]})`;
    }
  }
  return null;
}

async function merge(dir: string, tag: string, R: Float64Array[], written: Written, bufferRecords: number, mirrorEntries: number, scale: number): Promise<{ counts: string; weighted: string }> {
  const n = R.length;
  const setup: MergeSetup = {
    nCols: n, scale, bufferRecords, disjoint: true, mirrorEntries, mirrorMemory: null,
    weigh: {
      weighting: { ...PPMI },
      normalize: 'l2', valueType: 'float32', marginals: marginalsOf(R, scale),
    },
  };
  const task: MergeTask = {
    file: path.join(dir, `counts-${tag}.arrow`), weightedFile: path.join(dir, `weighted-${tag}.arrow`),
    firstRow: 0, endRow: n, runs: written.runs, mirror: { segments: written.segments, nnz: written.nnz },
  };
  const mapper = new MergeMapper(setup);
  const result = await mapper.run(task, () => {});
  await mapper.finish();
  expect(result.entries).toBe(expectedCells(R, scale).rows.length);
  return { counts: task.file, weighted: task.weightedFile! };
}

const sha = (file: string): string => createHash('sha256').update(readFileSync(file)).digest('hex');

describe('mirrored merge of R and Rᵀ', () => {
  // 400 × 400 at this density gives more cells than a shard's record batch (2^16) in both shards, so the shard
  // writers' batches are cut inside rows and inside weighted blocks too (every load of rows reads the whole mirror file, so the largest case takes few loads)
  const tiny = [[1, 1], [2, 3], [3, 50], [5, 1 << 20], [4096, 7]];
  const cases = [
    { n: 12, density: 0.4, seed: 1, rowsPerTask: 5, scale: 1, buffers: tiny },
    { n: 40, density: 0.1, seed: 2, rowsPerTask: 7, scale: 60, buffers: tiny },
    { n: 400, density: 0.9, seed: 3, rowsPerTask: 64, scale: 60, buffers: [[7, 20000], [4096, 2500]] },
  ];
  for (const { n, density, seed, rowsPerTask, scale, buffers } of cases) {
    it(`${n} rows (density ${density}, scale ${scale}): R + Rᵀ by definition, whatever the buffers`, async () => {
      const dir = mkdtempSync(path.join(work, `n${n}-`));
      const R = randomR(n, density, seed);
      const written = writeR(dir, R, rowsPerTask);
      const want = expectedCells(R, scale);
      const wantWeighted = expectedWeighted(R, scale);
      if (n === 400) expect(wantWeighted.rows.length).toBeGreaterThan(1 << 16);
      const big = await merge(dir, 'big', R, written, 16384, 1 << 20, scale);
      for (const [bufferRecords, mirrorEntries] of buffers) {
        const got = await merge(dir, `b${bufferRecords}-m${mirrorEntries}`, R, written, bufferRecords, mirrorEntries, scale);
        expect(firstDifference(cellsOf(got.counts), want)).toBeNull();
        expect(firstDifference(cellsOf(got.weighted), wantWeighted)).toBeNull();
        // the same bytes as with buffers that never fill: counts and weighted shards
        expect(sha(got.counts)).toBe(sha(big.counts));
        expect(sha(got.weighted)).toBe(sha(big.weighted));
      }
    });
  }
});
