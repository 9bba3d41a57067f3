import { createHash } from 'node:crypto';
import type { KindredConfig } from './types.js';

/**
 * JSON with object keys sorted recursively (by UTF-16 code units, JavaScript's default sort), no whitespace,
 * arrays in their order, and numbers and strings written as JSON.stringify writes them. Keys whose value is
 * undefined are left out, as JSON.stringify does. Values JSON cannot hold (NaN, Infinity, functions, bigints) are bugs.
 */
export function canonicalJson(value: unknown): string {
  if (value === null || typeof value === 'boolean' || typeof value === 'string') return JSON.stringify(value);
  if (typeof value === 'number') {
    if (!Number.isFinite(value)) throw new TypeError(`canonicalJson: ${value} has no JSON form`);
    return JSON.stringify(value);
  }
  if (Array.isArray(value)) {
    return `[${value.map((v) => (v === undefined ? 'null' : canonicalJson(v))).join(',')}]`;
  }
  if (typeof value === 'object') {
    const obj = value as Record<string, unknown>;
    const keys = Object.keys(obj)
      .filter((k) => obj[k] !== undefined)
      .sort();
    return `{${keys.map((k) => `${JSON.stringify(k)}:${canonicalJson(obj[k])}`).join(',')}}`;
  }
  throw new TypeError(`canonicalJson: a ${typeof value} has no JSON form`);
}

/** sha256 (hex) of the canonical JSON of a resolved config, UTF-8 encoded. Defaults are filled before hashing, so writing a default out does not change it. */
export function configHash(cfg: KindredConfig): string {
  return createHash('sha256').update(canonicalJson(cfg), 'utf8').digest('hex');
}
