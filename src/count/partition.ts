import type { ContextsConfig } from '../config/types.js';
import type { Vocabulary } from '../store/vocab-file.js';

/** Rows [firstRow, endRow) of one shard. */
export interface RowRange {
  firstRow: number;
  endRow: number;
}

/**
 * Cuts rows 0..V-1 into `parts` contiguous ranges of about equal expected nonzeros. A row's expected
 * nonzeros are estimated from the vocabulary pass: at most count × window span, at most the column count.
 * Deterministic, so a shard's rows depend on the vocabulary and settings only.
 */
export function partitionRows(vocab: Vocabulary, contexts: ContextsConfig, nCols: number, parts: number): RowRange[] {
  const n = vocab.terms.length;
  const span = contexts.type === 'document' ? 1 : contexts.window * (contexts.direction === 'symmetric' ? 2 : 1);
  const est = new Float64Array(n);
  let total = 0;
  for (let r = 0; r < n; r++) {
    est[r] = contexts.type === 'document' ? vocab.docFreqs[r] : Math.min(vocab.counts[r] * span, nCols);
    total += est[r];
  }
  const ranges: RowRange[] = [];
  let row = 0;
  let acc = 0;
  for (let p = 0; p < parts; p++) {
    const first = row;
    const goal = (total * (p + 1)) / parts;
    if (p === parts - 1) row = n;
    // cut where the running estimate passes the goal nearest; a part may be empty when rows are few
    else while (row < n && acc + est[row] / 2 < goal) acc += est[row++];
    ranges.push({ firstRow: first, endRow: row });
  }
  return ranges;
}
