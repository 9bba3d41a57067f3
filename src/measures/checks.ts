/** Shape checks shared by the measures. A failure here is a bug in the caller, not a user error. */
import type { SparseVector } from './types.js';

/** Larger than any uint32 index: the merge-walk's end-of-row marker. */
export const PAST_LAST_INDEX = 0x1_0000_0000;

export function checkDense(u: Float64Array, v: Float64Array, measure: string): void {
  if (u.length !== v.length) {
    throw new RangeError(`${measure}: dense vectors differ in length (${u.length} vs ${v.length})`);
  }
}

export function checkSparse(u: SparseVector, v: SparseVector, measure: string): void {
  if (u.indices.length !== u.values.length || v.indices.length !== v.values.length) {
    throw new RangeError(`${measure}: sparse vector has indices and values of different lengths`);
  }
}
