import type { Marginals, RowBlock } from './types.js';

/** Number of rows in a block. */
export function blockRowCount(block: RowBlock): number {
  return block.indptr.length - 1;
}

/** Throws (a bug, not a user error) when a block does not fit the marginals it is weighted with. */
export function checkBlockFits(block: RowBlock, m: Marginals): void {
  const nRows = blockRowCount(block);
  if (block.firstRow < 0 || block.firstRow + nRows > m.nRows) {
    throw new Error(`row block [${block.firstRow}, ${block.firstRow + nRows}) lies outside the ${m.nRows} rows of the marginals`);
  }
  if (block.cols.length !== block.values.length || block.indptr[nRows] !== block.values.length) {
    throw new Error(`row block is inconsistent: indptr ends at ${block.indptr[nRows]}, ${block.cols.length} cols, ${block.values.length} values`);
  }
}

/** A block with the same rows and columns as `block` (sharing its indptr and cols) and new values. */
export function withValues(block: RowBlock, values: Float64Array): RowBlock {
  return { firstRow: block.firstRow, indptr: block.indptr, cols: block.cols, values };
}

/**
 * Removes entries whose value is exactly 0, so a weighted block stays sparse.
 * Returns the block itself when it has no such entry.
 */
export function dropZeros(block: RowBlock): RowBlock {
  const { indptr, cols, values } = block;
  let zeros = 0;
  for (let p = 0; p < values.length; p++) if (values[p] === 0) zeros++;
  if (zeros === 0) return block;
  return dropZerosInPlace({ firstRow: block.firstRow, indptr: indptr.slice(), cols: cols.slice(), values: values.slice() });
}

/**
 * dropZeros in place: the block's own arrays compacted (each entry moves only towards the front), returned as views
 * of them. For blocks whose arrays the caller owns and no longer needs: no array is allocated.
 */
export function dropZerosInPlace(block: RowBlock): RowBlock {
  const { indptr, cols, values } = block;
  const nRows = blockRowCount(block);
  let q = indptr[0];
  for (let r = 0, start = indptr[0]; r < nRows; r++) {
    const end = indptr[r + 1];
    for (let p = start; p < end; p++) {
      const v = values[p];
      if (v === 0) continue;
      cols[q] = cols[p];
      values[q] = v;
      q++;
    }
    indptr[r + 1] = q;
    start = end;
  }
  return { firstRow: block.firstRow, indptr, cols: cols.subarray(0, q), values: values.subarray(0, q) };
}
