/**
 * Every reweighting scheme and both row normalizations on seeded random count matrices,
 * checked against the numpy/scipy reference (scripts/reference/weighting.py via python3), relative 1e-9.
 */
import { describe, expect, it } from 'vitest';
import type { Normalization, WeightingConfig } from '../src/config/types.js';
import { isKindredError } from '../src/errors.js';
import {
  computeMarginals,
  getWeighting,
  logFn,
  normalizeRows,
  precomputeContextTerms,
  weightAndNormalizeInPlace,
  weightBlock,
  weightingSchemes,
} from '../src/weight/index.js';
import type { RowBlock } from '../src/weight/types.js';
import { pythonAvailable, runPythonJson } from './helpers/python.js';
import { mulberry32 as prng } from './helpers/random.js';
import { splitRowBlock } from './helpers/reference.js';


interface Coo {
  nRows: number;
  nCols: number;
  rows: number[];
  cols: number[];
  values: number[];
}

/**
 * A random sparse count matrix: some empty rows, one row present in every column (so plain idf is 0 there),
 * integer counts (heavy-tailed) or fractional ones (as harmonic windows produce).
 */
function randomCounts(seed: number, nRows: number, nCols: number, density: number, fractional: boolean): Coo {
  const rnd = prng(seed);
  const out: Coo = { nRows, nCols, rows: [], cols: [], values: [] };
  for (let r = 0; r < nRows; r++) {
    const empty = r % 9 === 4;
    for (let c = 0; c < nCols; c++) {
      if (empty) continue;
      if (r !== 1 && rnd() >= density) continue;
      const base = Math.floor(1 / (rnd() + 0.02));
      const value = fractional ? base / (1 + Math.floor(rnd() * 5)) : base;
      out.rows.push(r);
      out.cols.push(c);
      out.values.push(value);
    }
  }
  return out;
}

function toBlock(m: Coo): RowBlock {
  const indptr = new Uint32Array(m.nRows + 1);
  for (const r of m.rows) indptr[r + 1]++;
  for (let r = 0; r < m.nRows; r++) indptr[r + 1] += indptr[r];
  return { firstRow: 0, indptr, cols: Uint32Array.from(m.cols), values: Float64Array.from(m.values) };
}

function flatten(blocks: RowBlock[]): { rows: number[]; cols: number[]; values: number[] } {
  const out = { rows: [] as number[], cols: [] as number[], values: [] as number[] };
  for (const b of blocks) {
    for (let r = 0; r + 1 < b.indptr.length; r++) {
      for (let p = b.indptr[r]; p < b.indptr[r + 1]; p++) {
        out.rows.push(b.firstRow + r);
        out.cols.push(b.cols[p]);
        out.values.push(b.values[p]);
      }
    }
  }
  return out;
}

const base: WeightingConfig = { scheme: 'ppmi', smoothing: 1, shift: 1, logBase: '2', tf: 'raw', idf: 'plain' };

const weightings: WeightingConfig[] = [
  { ...base, scheme: 'ppmi' },
  { ...base, scheme: 'ppmi', smoothing: 0.75, logBase: 'e' },
  { ...base, scheme: 'ppmi', smoothing: 0.75, shift: 5, logBase: '10' },
  { ...base, scheme: 'pmi' },
  { ...base, scheme: 'pmi', smoothing: 0.75, shift: 2, logBase: 'e' },
  { ...base, scheme: 'observed-expected' },
  { ...base, scheme: 'ttest' },
  { ...base, scheme: 'log-count' },
  { ...base, scheme: 'log-count', logBase: 'e' },
  { ...base, scheme: 'log-count', logBase: '10' },
  { ...base, scheme: 'tfidf', tf: 'raw', idf: 'plain' },
  { ...base, scheme: 'tfidf', tf: 'log', idf: 'plain', logBase: 'e' },
  { ...base, scheme: 'tfidf', tf: 'raw', idf: 'smooth', logBase: '10' },
  { ...base, scheme: 'tfidf', tf: 'log', idf: 'smooth' },
];
const normalizations: Normalization[] = ['none', 'l2', 'l1'];
// Integer counts; fractional counts (tf 'log' is meant for integer counts, so TF-IDF runs on the integer ones only).
const matrices = [randomCounts(7, 40, 30, 0.2, false), randomCounts(11, 23, 57, 0.1, true)];

interface PyResult {
  rows: number[];
  cols: number[];
  values: number[];
  rowSums: number[];
  colSums: number[];
  total: number;
  rowNnz: number[];
}

interface Case {
  name: string;
  matrix: Coo;
  weighting: WeightingConfig;
  normalize: Normalization;
}

const cases: Case[] = [];
matrices.forEach((matrix, mi) => {
  for (const weighting of weightings) {
    if (weighting.scheme === 'tfidf' && mi === 1) continue;
    for (const normalize of normalizations) {
      const w = weighting;
      const name = `matrix ${mi} ${w.scheme} α=${w.smoothing} k=${w.shift} log${w.logBase} tf=${w.tf} idf=${w.idf} norm=${normalize}`;
      cases.push({ name, matrix, weighting, normalize });
    }
  }
});

/** |a − b| ≤ 1e-9 · max(|a|, |b|): relative agreement with numpy. */
function closeRel(a: number, b: number, rel: number): boolean {
  return Math.abs(a - b) <= rel * Math.max(Math.abs(a), Math.abs(b));
}

describe.skipIf(!pythonAvailable())('weighting vs numpy/scipy (scripts/reference/weighting.py)', () => {
  // Collected even when skipped, so only call python when it is there.
  const reference = pythonAvailable()
    ? runPythonJson<PyResult[]>(['scripts/reference/weight_cases.py'], {
        cases: cases.map((c) => ({ ...c.matrix, weighting: c.weighting, normalize: c.normalize })),
      })
    : [];

  it('covers every registered scheme', () => {
    const covered = new Set(weightings.map((w) => w.scheme));
    expect([...covered].sort()).toEqual([...weightingSchemes].sort());
  });

  it('marginals (row sums, column sums, total, nonzeros per row) match numpy/scipy', () => {
    matrices.forEach((matrix, mi) => {
      const ref = reference[cases.findIndex((c) => c.matrix === matrix)];
      const m = computeMarginals(splitRowBlock(toBlock(matrix), 6), matrix.nRows, matrix.nCols);
      expect(Array.from(m.rowNnz), `matrix ${mi}`).toEqual(ref.rowNnz);
      m.rowSums.forEach((v, i) => expect(closeRel(v, ref.rowSums[i], 1e-12) || v === ref.rowSums[i]).toBe(true));
      m.colSums.forEach((v, i) => expect(closeRel(v, ref.colSums[i], 1e-12) || v === ref.colSums[i]).toBe(true));
      expect(closeRel(m.total, ref.total, 1e-12)).toBe(true);
    });
  });

  it.each(cases.map((c, i) => [c.name, i] as const))('%s matches numpy/scipy to relative 1e-9', (_name, i) => {
    const c = cases[i];
    const ref = reference[i];
    const blocks = splitRowBlock(toBlock(c.matrix), 7);
    const m = computeMarginals(blocks, c.matrix.nRows, c.matrix.nCols);
    const terms = precomputeContextTerms(m, c.weighting);
    const got = flatten(blocks.map((b) => normalizeRows(weightBlock(b, m, c.weighting, terms), c.normalize)));
    // the count stage's path: each block weighted and normalized in its own arrays, the same bits
    const copies = blocks.map((b) => ({ firstRow: b.firstRow, indptr: b.indptr.slice(), cols: b.cols.slice(), values: b.values.slice() }));
    expect(flatten(copies.map((b) => weightAndNormalizeInPlace(b, m, c.weighting, c.normalize, terms)))).toEqual(got);
    expect(got.rows).toEqual(ref.rows);
    expect(got.cols).toEqual(ref.cols);
    expect(got.values.length).toBe(ref.values.length);
    let worst = 0;
    got.values.forEach((v, p) => {
      const b = ref.values[p];
      const err = Math.abs(v - b) / Math.max(Math.abs(v), Math.abs(b));
      if (err > worst) worst = err;
    });
    expect(worst).toBeLessThanOrEqual(1e-9);
  });
});

describe('weighting surface', () => {
  const matrix = randomCounts(3, 12, 10, 0.4, false);
  const block = toBlock(matrix);
  const m = computeMarginals([block], matrix.nRows, matrix.nCols);

  it('getWeighting keeps every input entry; weightBlock drops exactly the zero weights', () => {
    const cfg: WeightingConfig = { ...base, scheme: 'ppmi' };
    const full = getWeighting('ppmi')(block, m, cfg);
    expect(full.values.length).toBe(block.values.length);
    const zeros = Array.from(full.values).filter((v) => v === 0).length;
    expect(zeros).toBeGreaterThan(0);
    const sparse = weightBlock(block, m, cfg);
    expect(sparse.values.length).toBe(block.values.length - zeros);
    expect(Array.from(sparse.values).every((v) => v > 0)).toBe(true);
  });

  it('plain idf of a term in every document is 0, so that term row is dropped', () => {
    const cfg: WeightingConfig = { ...base, scheme: 'tfidf' };
    expect(m.rowNnz[1]).toBe(matrix.nCols);
    const out = weightBlock(block, m, cfg);
    expect(out.indptr[2] - out.indptr[1]).toBe(0);
  });

  it('weighting in row blocks equals weighting the whole matrix at once', () => {
    for (const cfg of weightings) {
      const whole = flatten([weightBlock(block, m, cfg)]);
      const parts = flatten(splitRowBlock(block, 5).map((b) => weightBlock(b, m, cfg)));
      expect(parts).toEqual(whole);
    }
  });

  it('L2 rows have unit euclidean norm, L1 rows unit absolute sum (common practice, no source)', () => {
    const w = weightBlock(block, m, { ...base, scheme: 'ttest' });
    for (const kind of ['l2', 'l1'] as const) {
      const n = normalizeRows(w, kind);
      for (let r = 0; r + 1 < n.indptr.length; r++) {
        if (n.indptr[r] === n.indptr[r + 1]) continue;
        let s = 0;
        for (let p = n.indptr[r]; p < n.indptr[r + 1]; p++) s += kind === 'l2' ? n.values[p] ** 2 : Math.abs(n.values[p]);
        expect(s).toBeCloseTo(1, 12);
      }
    }
    expect(normalizeRows(w, 'none')).toBe(w);
  });

  it('PPMI does not change when every count is scaled by the same factor (common practice, no source)', () => {
    const scaled: RowBlock = { ...block, values: block.values.map((v) => v * 8) };
    const ms = computeMarginals([scaled], matrix.nRows, matrix.nCols);
    const cfg: WeightingConfig = { ...base, scheme: 'ppmi', smoothing: 0.75 };
    const a = weightBlock(block, m, cfg);
    const b = weightBlock(scaled, ms, cfg);
    expect(Array.from(b.cols)).toEqual(Array.from(a.cols));
    a.values.forEach((v, p) => expect(b.values[p]).toBeCloseTo(v, 12));
  });

  it('log bases are 2, e and 10', () => {
    expect(logFn('2')(8)).toBe(3);
    expect(logFn('e')(Math.E)).toBe(1);
    expect(logFn('10')(1000)).toBe(3);
  });

  it('bad options are user errors naming the config key', () => {
    const expectKindred = (f: () => unknown, key: string) => {
      try {
        f();
      } catch (e) {
        expect(isKindredError(e)).toBe(true);
        expect((e as Error).message).toContain(key);
        return;
      }
      throw new Error('expected a KindredError');
    };
    expectKindred(() => weightBlock(block, m, { ...base, shift: 0 }), 'weighting.shift');
    expectKindred(() => weightBlock(block, m, { ...base, smoothing: -1 }), 'weighting.smoothing');
    expectKindred(() => getWeighting('nope' as WeightingConfig['scheme']), 'weighting.scheme');
    expectKindred(() => logFn('3' as WeightingConfig['logBase']), 'weighting.logBase');
    expectKindred(() => normalizeRows(block, 'l3' as Normalization), 'normalize');
  });
});
