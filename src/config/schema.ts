import { readFileSync } from 'node:fs';
import { fileURLToPath } from 'node:url';

/**
 * One node of the shipped JSON Schema, limited to the keywords our validator interprets.
 * Annotation keywords ($schema, $id, title, description) are allowed and ignored.
 */
export interface SchemaNode {
  type?: SchemaType;
  enum?: unknown[];
  minimum?: number;
  maximum?: number;
  exclusiveMinimum?: number;
  minItems?: number;
  minLength?: number;
  items?: SchemaNode;
  properties?: Record<string, SchemaNode>;
  additionalProperties?: boolean;
  required?: string[];
  default?: unknown;
  oneOf?: SchemaNode[];
  description?: string;
}

export type SchemaType = 'object' | 'array' | 'string' | 'number' | 'integer' | 'boolean' | 'null';

const SCHEMA_TYPES: ReadonlySet<string> = new Set(['object', 'array', 'string', 'number', 'integer', 'boolean', 'null']);

/** Keywords the validator understands; anything else in the schema file is refused so it cannot be silently ignored. */
const KNOWN_KEYWORDS: ReadonlySet<string> = new Set([
  '$schema', '$id', 'title', 'description',
  'type', 'enum', 'minimum', 'maximum', 'exclusiveMinimum', 'minItems', 'minLength',
  'items', 'properties', 'additionalProperties', 'required', 'default', 'oneOf',
]);

/** The schema file, located relative to this module: src/config/ and dist/config/ both sit two levels below the package root. */
export const SCHEMA_URL = new URL('../../configs/kindred.schema.json', import.meta.url);

let cachedSchema: SchemaNode | undefined;

/** Reads and checks the shipped schema once. A missing or malformed schema is an installation bug, so it throws a plain Error. */
export function loadSchema(): SchemaNode {
  if (cachedSchema !== undefined) return cachedSchema;
  const file = fileURLToPath(SCHEMA_URL);
  let parsed: unknown;
  try {
    parsed = JSON.parse(readFileSync(file, 'utf8'));
  } catch (e) {
    throw new Error(`kindred installation is broken: cannot read the config schema ${file}: ${(e as Error).message}`);
  }
  cachedSchema = parseSchema(parsed);
  return cachedSchema;
}

/** Checks a parsed schema document against the supported subset; throws a plain Error naming the node otherwise. */
export function parseSchema(value: unknown): SchemaNode {
  return checkSchemaNode(value, '#');
}

function isPlainObject(v: unknown): v is Record<string, unknown> {
  return typeof v === 'object' && v !== null && !Array.isArray(v);
}

/** Confirms a parsed schema node uses only the supported subset, with the right JSON types. */
function checkSchemaNode(node: unknown, where: string): SchemaNode {
  const bad = (what: string): never => {
    throw new Error(`config schema ${where}: ${what}`);
  };
  if (!isPlainObject(node)) return bad('is not an object');
  for (const k of Object.keys(node)) if (!KNOWN_KEYWORDS.has(k)) bad(`keyword "${k}" is not supported by kindred's validator`);
  const out: SchemaNode = {};
  if (node.type !== undefined) {
    if (typeof node.type !== 'string' || !SCHEMA_TYPES.has(node.type)) bad(`type ${JSON.stringify(node.type)} is not supported`);
    out.type = node.type as SchemaType;
  }
  if (node.enum !== undefined) {
    if (!Array.isArray(node.enum) || node.enum.length === 0) bad('enum must be a non-empty array');
    out.enum = node.enum as unknown[];
  }
  for (const k of ['minimum', 'maximum', 'exclusiveMinimum', 'minItems', 'minLength'] as const) {
    const v = node[k];
    if (v === undefined) continue;
    if (typeof v !== 'number' || !Number.isFinite(v)) bad(`${k} must be a number`);
    out[k] = v as number;
  }
  if (node.items !== undefined) out.items = checkSchemaNode(node.items, `${where}/items`);
  if (node.properties !== undefined) {
    if (!isPlainObject(node.properties)) bad('properties must be an object');
    const props: Record<string, SchemaNode> = {};
    for (const [k, v] of Object.entries(node.properties as Record<string, unknown>)) {
      props[k] = checkSchemaNode(v, `${where}/properties/${k}`);
    }
    out.properties = props;
  }
  if (node.additionalProperties !== undefined) {
    if (typeof node.additionalProperties !== 'boolean') bad('additionalProperties must be a boolean');
    out.additionalProperties = node.additionalProperties as boolean;
  }
  if (node.required !== undefined) {
    const req = node.required;
    if (!Array.isArray(req) || !req.every((r): r is string => typeof r === 'string')) bad('required must be an array of strings');
    out.required = req as string[];
  }
  if (node.oneOf !== undefined) {
    if (!Array.isArray(node.oneOf) || node.oneOf.length === 0) bad('oneOf must be a non-empty array');
    out.oneOf = (node.oneOf as unknown[]).map((b, i) => checkSchemaNode(b, `${where}/oneOf/${i}`));
  }
  if (node.description !== undefined) {
    if (typeof node.description !== 'string') bad('description must be a string');
    out.description = node.description as string;
  }
  if ('default' in node) out.default = node.default;
  return out;
}

/** Walks a dotted key path through nested `properties`; returns undefined when a segment is not a known key. */
export function schemaNodeAt(root: SchemaNode, keys: readonly string[]): SchemaNode | undefined {
  let node: SchemaNode | undefined = root;
  for (const k of keys) {
    if (node?.properties === undefined || !Object.hasOwn(node.properties, k)) return undefined;
    node = node.properties[k];
  }
  return node;
}
