import type { Normalization } from '../config/types.js';
import { KindredError } from '../errors.js';
import { blockRowCount, withValues } from './block.js';
import type { RowBlock } from './types.js';

/**
 * Scales each row to unit L2 norm (sqrt Σ v²) or unit L1 norm (Σ |v|); 'none' returns the block itself.
 * Returns a new block sharing indptr and cols with the input; rows with no entries, or only zeros, are left as they are.
 * `into`: where the values go (block.values itself, to normalize in place); a new array when absent.
 */
export function normalizeRows(block: RowBlock, kind: Normalization, into?: Float64Array): RowBlock {
  if (kind === 'none') return block;
  if (kind !== 'l2' && kind !== 'l1') {
    throw new KindredError(`normalize: unknown value ${JSON.stringify(kind)}; use one of "l2", "l1", "none"`);
  }
  const { indptr, values } = block;
  const out = into ?? new Float64Array(values.length);
  const nRows = blockRowCount(block);
  for (let r = 0; r < nRows; r++) {
    const start = indptr[r];
    const end = indptr[r + 1];
    let norm = 0;
    if (kind === 'l2') {
      // ‖v‖₂ = sqrt(Σ v²) (common practice, no source).
      for (let p = start; p < end; p++) norm += values[p] * values[p];
      norm = Math.sqrt(norm);
    } else {
      // ‖v‖₁ = Σ |v| (common practice, no source).
      for (let p = start; p < end; p++) norm += Math.abs(values[p]);
    }
    if (norm === 0) {
      for (let p = start; p < end; p++) out[p] = values[p];
      continue;
    }
    for (let p = start; p < end; p++) out[p] = values[p] / norm;
  }
  return withValues(block, out);
}
