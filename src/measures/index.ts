/** The registry of distance measures: adding one is one file and one line here. */
import { KindredError } from '../errors.js';
import { cosine } from './cosine.js';
import { dice } from './dice.js';
import { euclidean } from './euclidean.js';
import { jaccard } from './jaccard.js';
import { jensenShannon } from './js.js';
import { kullbackLeibler } from './kl.js';
import { manhattan } from './manhattan.js';
import { matching } from './matching.js';
import { overlap } from './overlap.js';
import type { Measure, MeasureName } from './types.js';

export type { Measure, MeasureName, SparseVector } from './types.js';
export { KL_SMOOTHING_EPSILON, makeKullbackLeibler } from './kl.js';
export { JS_MAX_DISTANCE } from './js.js';

const REGISTRY: Readonly<Record<MeasureName, Measure>> = Object.freeze({
  euclidean,
  manhattan,
  cosine,
  kl: kullbackLeibler,
  js: jensenShannon,
  jaccard,
  dice,
  overlap,
  matching,
});

/** Every measure name, in the order the command line lists them. */
export const MEASURE_NAMES: readonly MeasureName[] = Object.freeze(Object.keys(REGISTRY) as MeasureName[]);

export function isMeasureName(s: string): s is MeasureName {
  return Object.hasOwn(REGISTRY, s);
}

/** The measure called `name`; an unknown name is a user error listing the allowed ones. */
export function getMeasure(name: string): Measure {
  if (!isMeasureName(name)) {
    throw new KindredError(`unknown measure "${name}"; allowed: ${MEASURE_NAMES.join(', ')}`);
  }
  return REGISTRY[name];
}
