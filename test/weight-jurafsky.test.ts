/**
 * PPMI against the worked example of Jurafsky & Martin, "Speech and Language Processing", 3rd ed. draft,
 * chapter 6 (Vector Semantics and Embeddings), section on pointwise mutual information:
 * the term-context count table (cherry, strawberry, digital, information × computer, data, result, pie, sugar)
 * and the PPMI table computed from it with log base 2. All book numbers typed in (from memory).
 */
import { describe, expect, it } from 'vitest';
import type { WeightingConfig } from '../src/config/types.js';
import { computeMarginals, precomputeContextTerms, weightBlock } from '../src/weight/index.js';
import type { RowBlock } from '../src/weight/types.js';
import { pythonAvailable, runPythonJson } from './helpers/python.js';

const words = ['cherry', 'strawberry', 'digital', 'information'];
const contexts = ['computer', 'data', 'result', 'pie', 'sugar'];
// Jurafsky & Martin 3rd ed. draft, ch. 6, term-context count table (from memory).
const counts = [
  [2, 8, 9, 442, 25],
  [0, 0, 1, 60, 19],
  [1670, 1683, 85, 5, 4],
  [3325, 3982, 378, 5, 13],
];
// The same book's row, column and grand totals of that table (from memory).
const bookRowTotals = [486, 80, 3447, 7703];
const bookColTotals = [4997, 5673, 473, 512, 61];
const bookTotal = 11716;
// The book's PPMI table for the counts above, log base 2, printed to two decimals (from memory).
const bookPpmi = [
  [0, 0, 0, 4.38, 3.3],
  [0, 0, 0, 4.1, 5.51],
  [0.18, 0.01, 0, 0, 0],
  [0.02, 0.09, 0.28, 0, 0],
];

function denseToBlock(dense: number[][]): RowBlock {
  const indptr = new Uint32Array(dense.length + 1);
  const cols: number[] = [];
  const values: number[] = [];
  dense.forEach((row, r) => {
    row.forEach((v, c) => {
      if (v !== 0) {
        cols.push(c);
        values.push(v);
      }
    });
    indptr[r + 1] = cols.length;
  });
  return { firstRow: 0, indptr, cols: Uint32Array.from(cols), values: Float64Array.from(values) };
}

function blockToDense(block: RowBlock, nCols: number): number[][] {
  const out: number[][] = [];
  for (let r = 0; r + 1 < block.indptr.length; r++) {
    const row = new Array<number>(nCols).fill(0);
    for (let p = block.indptr[r]; p < block.indptr[r + 1]; p++) row[block.cols[p]] = block.values[p];
    out.push(row);
  }
  return out;
}

const block = denseToBlock(counts);
const m = computeMarginals([block], words.length, contexts.length);
const ppmi: WeightingConfig = { scheme: 'ppmi', smoothing: 1, shift: 1, logBase: '2', tf: 'raw', idf: 'plain' };

describe('PPMI: Jurafsky & Martin, Speech and Language Processing 3rd ed. draft, ch. 6 worked example (from memory)', () => {
  it('marginals equal the totals printed with the count table (from memory)', () => {
    expect(Array.from(m.rowSums)).toEqual(bookRowTotals);
    expect(Array.from(m.colSums)).toEqual(bookColTotals);
    expect(m.total).toBe(bookTotal);
  });

  it('PPMI (α = 1, k = 1, log base 2) equals the printed PPMI table to its two-decimal rounding (from memory)', () => {
    const got = blockToDense(weightBlock(block, m, ppmi), contexts.length);
    for (let r = 0; r < words.length; r++) {
      for (let c = 0; c < contexts.length; c++) {
        const where = `${words[r]} × ${contexts[c]}`;
        if (bookPpmi[r][c] === 0) expect(got[r][c], where).toBe(0);
        else expect(Math.abs(got[r][c] - bookPpmi[r][c]), where).toBeLessThanOrEqual(0.005 + 1e-12);
      }
    }
  });

  it('zero PPMI cells are dropped: unobserved pairs and pairs with negative PMI have no entry', () => {
    const out = weightBlock(block, m, ppmi);
    const nonzeroInBook = bookPpmi.flat().filter((v) => v !== 0).length;
    expect(out.values.length).toBe(nonzeroInBook);
  });

  it('the text\'s step-by-step value: P(information, data) = .3399, P(information) = .6575, P(data) = .4842, PPMI = .0944 (from memory)', () => {
    expect(counts[3][1] / m.total).toBeCloseTo(0.3399, 4);
    expect(m.rowSums[3] / m.total).toBeCloseTo(0.6575, 4);
    expect(m.colSums[1] / m.total).toBeCloseTo(0.4842, 4);
    const got = blockToDense(weightBlock(block, m, ppmi), contexts.length);
    expect(Math.abs(got[3][1] - 0.0944)).toBeLessThanOrEqual(0.00005 + 1e-12);
  });

  it('context smoothing example of the same chapter: P(a) = .99, P(b) = .01 give P_α(a) = .97, P_α(b) = .03 at α = 0.75 (from memory)', () => {
    const two = computeMarginals([denseToBlock([[99, 1]])], 1, 2);
    const terms = precomputeContextTerms(two, { ...ppmi, smoothing: 0.75 });
    expect(Math.abs(terms.colProb[0] - 0.97)).toBeLessThanOrEqual(0.005);
    expect(Math.abs(terms.colProb[1] - 0.03)).toBeLessThanOrEqual(0.005);
  });
});

describe.skipIf(!pythonAvailable())('smoothed PPMI (α = 0.75) on the same table vs numpy', () => {
  it('matches a dense numpy computation to relative 1e-12', () => {
    // numpy: P_α(c) = colsum^α / Σ colsum^α (Levy, Goldberg & Dagan 2015); PPMI = max(0, log2(P(w,c) / (P(w) P_α(c)))).
    const code = [
      'import json, sys, numpy as np',
      'C = np.array(json.load(sys.stdin), dtype=float)',
      'N = C.sum(); pw = C.sum(1) / N; cs = C.sum(0) ** 0.75; pc = cs / cs.sum()',
      "with np.errstate(divide='ignore'):",
      '    v = np.log2((C / N) / np.outer(pw, pc))',
      'print(json.dumps(np.where(C > 0, np.maximum(v, 0), 0).tolist()))',
    ].join('\n');
    const ref = runPythonJson<number[][]>(['-c', code], counts);
    const got = blockToDense(weightBlock(block, m, { ...ppmi, smoothing: 0.75 }), contexts.length);
    for (let r = 0; r < words.length; r++) {
      for (let c = 0; c < contexts.length; c++) {
        const a = got[r][c];
        const b = ref[r][c];
        expect(Math.abs(a - b), `${words[r]} × ${contexts[c]}`).toBeLessThanOrEqual(1e-12 * Math.max(Math.abs(a), Math.abs(b)));
      }
    }
    // Smoothing raises rare contexts' probability, so PPMI with the rare context "sugar" goes down (same chapter, from memory).
    expect(got[1][4]).toBeLessThan(bookPpmi[1][4]);
  });
});
