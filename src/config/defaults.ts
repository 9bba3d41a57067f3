import { loadSchema, type SchemaNode } from './schema.js';
import type { KindredConfig } from './types.js';

/** The defaults written in the schema, section by section; keys without a default (input.paths, $schema) are left out. */
export function schemaDefaults(node: SchemaNode = loadSchema()): Record<string, unknown> {
  const out: Record<string, unknown> = {};
  for (const [key, child] of Object.entries(node.properties ?? {})) {
    if (child.properties !== undefined) out[key] = schemaDefaults(child);
    else if (child.default !== undefined) out[key] = structuredClone(child.default);
  }
  return out;
}

function deepFreeze<T>(value: T): T {
  if (typeof value === 'object' && value !== null) {
    for (const v of Object.values(value)) deepFreeze(v);
    Object.freeze(value);
  }
  return value;
}

function buildDefaultConfig(): KindredConfig {
  const d = schemaDefaults();
  // input.paths has no default (a build must name its corpus); an empty list stands in so the object is complete.
  const input = { ...(d.input as Record<string, unknown>), paths: [] };
  return deepFreeze({ ...d, input } as unknown as KindredConfig);
}

/**
 * Every setting at its default, read from configs/kindred.schema.json (the single source of truth), deeply frozen.
 * input.paths is [] here, which is not a valid build: a config must name at least one input path.
 */
export const DEFAULT_CONFIG: KindredConfig = buildDefaultConfig();
