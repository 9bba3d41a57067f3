/**
 * The score written beside each distance in neighbour tables and answers: higher is closer. For the measures
 * defined as 1 − a similarity coefficient (cosine, jaccard, dice, overlap, matching) it is that coefficient,
 * 1 − distance; for the others (euclidean, manhattan, kl, js) it is the negated distance.
 */
import type { MeasureName } from '../measures/index.js';

const COEFFICIENT_MEASURES: ReadonlySet<MeasureName> = new Set(['cosine', 'jaccard', 'dice', 'overlap', 'matching']);

/** How the score of a measure is defined, in words (recorded in the manifest). */
export function scoreDefinition(measure: MeasureName): string {
  return COEFFICIENT_MEASURES.has(measure) ? '1 - distance' : '-distance';
}

export function scoreOf(measure: MeasureName, distance: number): number {
  return COEFFICIENT_MEASURES.has(measure) ? 1 - distance : -distance;
}
