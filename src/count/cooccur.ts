import type { ContextsConfig } from '../config/types.js';
import { BYTES_PER_SLOT, denseBytes } from './pair-accumulator.js';
import { MAX_ROW_WISE_COLUMNS } from './runs.js';

/** Largest window for which harmonic weights are scaled to exact integers (lcm(1..16) = 720720). */
const EXACT_HARMONIC_MAX_WINDOW = 16;

function gcd(a: number, b: number): number {
  while (b) [a, b] = [b, a % b];
  return a;
}

/**
 * Integer weight per distance 1..k and the common scale: uniform weights are 1; harmonic weights 1/d are
 * stored as lcm(1..k)/d so that every sum is an exact integer, whatever the order of addition.
 */
export function windowWeights(contexts: ContextsConfig): { weights: Float64Array; scale: number } {
  const k = contexts.window;
  const weights = new Float64Array(k + 1);
  let scale = 1;
  if (contexts.type === 'window' && contexts.weighting === 'harmonic') {
    if (k <= EXACT_HARMONIC_MAX_WINDOW) for (let d = 2; d <= k; d++) scale = (scale * d) / gcd(scale, d);
    for (let d = 1; d <= k; d++) weights[d] = k <= EXACT_HARMONIC_MAX_WINDOW ? scale / d : 1 / d;
  } else {
    for (let d = 1; d <= k; d++) weights[d] = 1;
  }
  return { weights, scale };
}

/** Share of the memory budget the pair accumulators get; the rest is for term tables, buffers and the runtime. */
const ACCUMULATOR_SHARE = 0.6;
/** Share of an accumulator's memory that its dense block may take. */
const DENSE_SHARE = 0.25;
/** Largest dense block side: past it the rows are rare enough that the hash is as good. */
export const MAX_DENSE_SIZE = 2048;
/**
 * Most rows of the dense band: on Brown ×10, 68.5 % of pair events have their smaller id below 64 (counted with
 * numpy over the corpus's windows), most of those with a larger id past the dense block.
 */
export const MAX_BAND_ROWS = 64;

/** Hash slots (a power of two) of all pair accumulators together that fit a memory budget. */
export function pairTableCapacity(memoryMiB: number): number {
  const bytes = memoryMiB * 1024 * 1024 * ACCUMULATOR_SHARE * (1 - DENSE_SHARE);
  return 2 ** Math.max(10, Math.floor(Math.log2(bytes / BYTES_PER_SLOT)));
}

/** Dense block side and hash slots of each of `mappers` accumulators. */
export function planAccumulators(
  memoryMiB: number, mappers: number, contexts: ContextsConfig, nRows: number, totalCapacity: number,
): { denseSize: number; bandRows: number; capacity: number } {
  const capacity = 2 ** Math.max(10, Math.floor(Math.log2(totalCapacity / mappers)));
  // the dense block holds integer sums: not for document contexts, nor for harmonic weights that are not integers
  if (contexts.type === 'document' || (contexts.weighting === 'harmonic' && contexts.window > EXACT_HARMONIC_MAX_WINDOW)) {
    return { denseSize: 0, bandRows: 0, capacity };
  }
  const triangle = contexts.direction === 'symmetric';
  const denseBudget = (memoryMiB * 1024 * 1024 * ACCUMULATOR_SHARE * DENSE_SHARE) / mappers;
  let d = Math.min(MAX_DENSE_SIZE, nRows);
  while (d > 0 && denseBytes(d, triangle) > denseBudget) d = Math.floor(d / 2);
  // symmetric windows: a band of the most frequent rows against every column, from what the block leaves
  // (read row by row at the merge, so not for matrices too wide for the row-wise merge)
  let bandRows = 0;
  if (triangle && nRows <= MAX_ROW_WISE_COLUMNS) {
    bandRows = Math.min(MAX_BAND_ROWS, d, Math.floor((denseBudget - denseBytes(d, triangle)) / (4 * nRows)));
  }
  return { denseSize: d, bandRows: Math.max(0, bandRows), capacity };
}
