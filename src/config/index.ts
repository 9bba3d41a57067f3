/** Configuration: the shipped schema, defaults, validation with one-line messages, --set overrides and hashing. */
export type * from './types.js';
export { DEFAULT_CONFIG } from './defaults.js';
export { loadConfig, type LoadedConfig } from './load.js';
export { applyOverride } from './override.js';
export { validateConfig } from './validate.js';
export { configHash, canonicalJson } from './canonical.js';
