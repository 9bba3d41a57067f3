import { KindredError } from '../errors.js';
import { loadSchema, type SchemaNode, type SchemaType } from './schema.js';
import { closestMatch } from './suggest.js';
import type { KindredConfig } from './types.js';

/** One validation failure: the dotted key path ('' for the top level) and the message without the path. */
export interface ConfigIssue {
  path: string;
  message: string;
}

function isPlainObject(v: unknown): v is Record<string, unknown> {
  return typeof v === 'object' && v !== null && !Array.isArray(v);
}

/** A value as it appears in messages: JSON, shortened so the message stays one readable line. */
export function showValue(v: unknown): string {
  const s = JSON.stringify(v) ?? String(v);
  return s.length > 60 ? `${s.slice(0, 57)}...` : s;
}

const TYPE_PHRASE: Record<SchemaType, string> = {
  object: 'an object',
  array: 'an array',
  string: 'a string',
  number: 'a number',
  integer: 'an integer',
  boolean: 'a boolean',
  null: 'null',
};

function matchesType(v: unknown, type: SchemaType): boolean {
  switch (type) {
    case 'object':
      return isPlainObject(v);
    case 'array':
      return Array.isArray(v);
    case 'string':
      return typeof v === 'string';
    case 'number':
      return typeof v === 'number' && Number.isFinite(v);
    case 'integer':
      return typeof v === 'number' && Number.isInteger(v);
    case 'boolean':
      return typeof v === 'boolean';
    case 'null':
      return v === null;
  }
}

function joinPath(base: string, key: string): string {
  return base === '' ? key : `${base}.${key}`;
}

/** Every dotted leaf and section path of the schema, for "did you mean" across sections. */
function allPaths(node: SchemaNode, base: string, out: string[]): string[] {
  for (const [k, child] of Object.entries(node.properties ?? {})) {
    const p = joinPath(base, k);
    out.push(p);
    allPaths(child, p, out);
  }
  return out;
}

/** The message for a key the schema does not know, with the closest sibling or the same name in another section. */
export function unknownKeyMessage(root: SchemaNode, parent: SchemaNode, parentPath: string, key: string): string {
  const allowed = Object.keys(parent.properties ?? {});
  let message = `unknown key ${JSON.stringify(joinPath(parentPath, key))} (allowed: ${allowed.join(', ')})`;
  const sibling = closestMatch(key, allowed);
  if (sibling !== undefined) return `${message}, did you mean ${JSON.stringify(sibling)}?`;
  const elsewhere = allPaths(root, '', []).find((p) => {
    const last = p.slice(p.lastIndexOf('.') + 1);
    return last.toLowerCase() === key.toLowerCase() && p !== joinPath(parentPath, key);
  });
  if (elsewhere !== undefined) message += `, did you mean ${JSON.stringify(elsewhere)}?`;
  return message;
}

/** Short description of what a node accepts, for oneOf messages ("a string or null"). */
function describeNode(node: SchemaNode): string {
  if (node.enum !== undefined) return `one of ${node.enum.map(String).join(', ')}`;
  if (node.oneOf !== undefined) return node.oneOf.map(describeNode).join(' or ');
  return node.type !== undefined ? TYPE_PHRASE[node.type] : 'any value';
}

/**
 * Checks `value` against `node` and returns the value with defaults filled in (a fresh copy; the input is not changed).
 * Issues are appended to `issues`; on an issue the returned value at that spot is meaningless.
 */
export function resolveNode(root: SchemaNode, node: SchemaNode, value: unknown, path: string, issues: ConfigIssue[]): unknown {
  const fail = (message: string): unknown => {
    issues.push({ path, message });
    return value;
  };

  if (node.oneOf !== undefined) {
    const matching = node.oneOf.filter((branch) => {
      const trial: ConfigIssue[] = [];
      resolveNode(root, branch, value, path, trial);
      return trial.length === 0;
    });
    if (matching.length !== 1) {
      // Report the branch whose type fits with its own message (e.g. an empty string), else the union.
      const typed = node.oneOf.find((b) => b.type !== undefined && matchesType(value, b.type));
      if (matching.length === 0 && typed !== undefined) return resolveNode(root, typed, value, path, issues);
      return fail(`${showValue(value)} is not ${describeNode(node)}`);
    }
    return resolveNode(root, matching[0], value, path, issues);
  }

  if (node.enum !== undefined) {
    // The enum implies the type, so a mismatch is reported as "not one of" with the allowed values.
    if (!node.enum.some((allowed) => allowed === value)) {
      const shown = node.enum.map(String);
      let message = `${showValue(value)} is not one of ${shown.join(', ')}`;
      const sameText = node.enum.find((allowed) => typeof allowed === 'string' && typeof value !== 'string' && String(value) === allowed);
      if (sameText !== undefined) message += ` (write it as the string ${JSON.stringify(sameText)})`;
      return fail(message);
    }
    return value;
  }

  if (node.type !== undefined && !matchesType(value, node.type)) {
    return fail(`${showValue(value)} is not ${TYPE_PHRASE[node.type]}`);
  }

  if (typeof value === 'number') {
    if (node.minimum !== undefined && value < node.minimum) return fail(`${showValue(value)} is below the minimum ${node.minimum}`);
    if (node.exclusiveMinimum !== undefined && value <= node.exclusiveMinimum) {
      return fail(`${showValue(value)} is not above the exclusive minimum ${node.exclusiveMinimum}`);
    }
    if (node.maximum !== undefined && value > node.maximum) return fail(`${showValue(value)} is above the maximum ${node.maximum}`);
    return value;
  }

  if (typeof value === 'string') {
    if (node.minLength !== undefined && [...value].length < node.minLength) {
      return fail(node.minLength === 1 ? `${showValue(value)} must not be empty` : `${showValue(value)} is shorter than ${node.minLength} characters`);
    }
    return value;
  }

  if (Array.isArray(value)) {
    if (node.minItems !== undefined && value.length < node.minItems) {
      return fail(`${showValue(value)} must have at least ${node.minItems} item${node.minItems === 1 ? '' : 's'}`);
    }
    const items = node.items;
    return items === undefined ? [...value] : value.map((item, i) => resolveNode(root, items, item, `${path}[${i}]`, issues));
  }

  if (isPlainObject(value)) return resolveObject(root, node, value, path, issues);

  return value;
}

function resolveObject(root: SchemaNode, node: SchemaNode, value: Record<string, unknown>, path: string, issues: ConfigIssue[]): Record<string, unknown> {
  const props = node.properties ?? {};
  const out: Record<string, unknown> = {};
  for (const key of Object.keys(value)) {
    if (!Object.hasOwn(props, key) && node.additionalProperties === false) {
      issues.push({ path: '', message: unknownKeyMessage(root, node, path, key) });
    }
  }
  for (const [key, child] of Object.entries(props)) {
    const childPath = joinPath(path, key);
    if (key === '$schema' && path === '') {
      // Allowed for editors, ignored by kindred: checked but left out of the resolved config and its hash.
      if (Object.hasOwn(value, key)) resolveNode(root, child, value[key], childPath, issues);
      continue;
    }
    let v: unknown;
    if (Object.hasOwn(value, key)) {
      v = value[key];
    } else if (node.required?.includes(key)) {
      issues.push({ path: '', message: `missing required key ${JSON.stringify(childPath)}` });
      continue;
    } else if (child.default !== undefined) {
      v = structuredClone(child.default);
    } else {
      continue;
    }
    out[key] = resolveNode(root, child, v, childPath, issues);
  }
  return out;
}

/** Checks that involve more than one key; run only when every key is valid on its own. */
function crossKeyIssues(cfg: KindredConfig): ConfigIssue[] {
  const issues: ConfigIssue[] = [];
  if (cfg.weighting.scheme === 'tfidf' && cfg.contexts.type !== 'document') {
    issues.push({
      path: '',
      message:
        `weighting.scheme "tfidf" requires contexts.type "document", found contexts.type ${JSON.stringify(cfg.contexts.type)}; ` +
        'set contexts.type to "document" or choose another weighting.scheme',
    });
  }
  if (cfg.neighbors.enabled && cfg.neighbors.source === 'vectors' && !cfg.vectors.enabled) {
    issues.push({
      path: '',
      message: 'neighbors.source "vectors" requires vectors.enabled true; set vectors.enabled to true or neighbors.source to "rows"',
    });
  }
  return issues;
}

/** Formats issues as one line: "key.path: message; other.key: message". */
export function formatIssues(issues: readonly ConfigIssue[]): string {
  return issues.map((i) => (i.path === '' ? i.message : `${i.path}: ${i.message}`)).join('; ');
}

/** Resolves a raw parsed value against the schema; returns all issues (single keys first, then cross-key checks). */
export function checkConfig(raw: unknown): { config: KindredConfig | undefined; issues: ConfigIssue[] } {
  const root = loadSchema();
  const issues: ConfigIssue[] = [];
  if (!isPlainObject(raw)) {
    issues.push({ path: '', message: `the top level must be an object, found ${showValue(raw)}` });
    return { config: undefined, issues };
  }
  const resolved = resolveNode(root, root, raw, '', issues);
  if (issues.length > 0) return { config: undefined, issues };
  const config = resolved as KindredConfig;
  issues.push(...crossKeyIssues(config));
  return issues.length > 0 ? { config: undefined, issues } : { config, issues };
}

/**
 * Validates a parsed config against the shipped schema and returns it with every default filled in.
 * `source` is the config file as the user named it; every problem is reported, joined with "; " on one line:
 * `config <source>: <key>: <problem>; <key>: <problem>`.
 */
export function validateConfig(raw: unknown, source: string): KindredConfig {
  const { config, issues } = checkConfig(raw);
  if (config === undefined) throw new KindredError(`config ${source}: ${formatIssues(issues)}`);
  return config;
}
