/** The library API behind the command line, usable from other programs. */
export { KindredError, isKindredError } from './errors.js';
export type * from './config/types.js';
export { loadConfig, validateConfig, configHash, DEFAULT_CONFIG } from './config/index.js';
export { runBuild, type BuildOptions } from './build.js';
export { loadBuild, findNeighbors, termId, weightedRow, type Neighbor, type LoadedBuild } from './query/neighbors.js';
export { readManifest, type Manifest } from './store/manifest.js';
export { readShard } from './store/shards.js';
export { readVocabulary, type Vocabulary } from './store/vocab-file.js';
export { getMeasure, MEASURE_NAMES, type Measure, type MeasureName, type SparseVector } from './measures/index.js';
export { getWeighting, weightBlock, normalizeRows } from './weight/index.js';
export { StreamProgress, silentProgress, type Progress } from './progress.js';
