import type { ContextsConfig } from '../config/types.js';

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

/** Whether the window weights are integers (scaled), so that every sum is exact whatever the order of addition. */
export function exactWeights(contexts: ContextsConfig): boolean {
  return contexts.type === 'document' || contexts.weighting !== 'harmonic' || contexts.window <= EXACT_HARMONIC_MAX_WINDOW;
}
