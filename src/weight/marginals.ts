import { blockRowCount } from './block.js';
import type { Marginals, RowBlock } from './types.js';

/**
 * Row sums, column sums, total and per-row nonzero counts of a count matrix given as row blocks
 * (each row in at most one block). Entries with value 0 are not counted as nonzeros.
 */
export function computeMarginals(blocks: Iterable<RowBlock>, nRows: number, nCols: number): Marginals {
  const rowSums = new Float64Array(nRows);
  const colSums = new Float64Array(nCols);
  const rowNnz = new Uint32Array(nRows);
  for (const block of blocks) {
    const n = blockRowCount(block);
    if (block.firstRow < 0 || block.firstRow + n > nRows) {
      throw new Error(`row block [${block.firstRow}, ${block.firstRow + n}) lies outside the ${nRows} rows`);
    }
    const { indptr, cols, values } = block;
    for (let r = 0; r < n; r++) {
      let sum = 0;
      let nnz = 0;
      for (let p = indptr[r]; p < indptr[r + 1]; p++) {
        const v = values[p];
        const c = cols[p];
        if (c >= nCols) throw new Error(`column ${c} lies outside the ${nCols} columns`);
        if (v === 0) continue;
        sum += v;
        colSums[c] += v;
        nnz++;
      }
      rowSums[block.firstRow + r] += sum;
      rowNnz[block.firstRow + r] += nnz;
    }
  }
  let total = 0;
  for (let w = 0; w < nRows; w++) total += rowSums[w];
  return { nRows, nCols, rowSums, colSums, total, rowNnz };
}
