import { KindredError } from '../errors.js';
import { loadSchema, type SchemaNode } from './schema.js';
import { formatIssues, resolveNode, showValue, unknownKeyMessage, type ConfigIssue } from './validate.js';

function isPlainObject(v: unknown): v is Record<string, unknown> {
  return typeof v === 'object' && v !== null && !Array.isArray(v);
}

/**
 * Applies one `--set key=value` assignment to a raw (unvalidated) config object, in place.
 * The key is a dotted path that must exist in the schema. The value is read as JSON when it parses
 * (`3`, `true`, `null`, `["a","b"]`, `{"window":3}`), else taken as a plain string; when the JSON reading does
 * not fit the key but the plain text does (`weighting.logBase=2`, `input.textField=null`), the text is used.
 * The value is checked against the key's schema at once, so the error names the assignment.
 * Missing sections are created; a whole section can be replaced with a JSON object.
 */
export function applyOverride(raw: Record<string, unknown>, assignment: string): void {
  const fail = (message: string): never => {
    throw new KindredError(`--set ${assignment}: ${message}`);
  };
  const eq = assignment.indexOf('=');
  if (eq < 0) fail('expected key=value, for example contexts.window=3');
  const key = assignment.slice(0, eq).trim();
  const text = assignment.slice(eq + 1);
  const segments = key.split('.');
  if (key === '' || segments.some((s) => s === '')) fail(`${JSON.stringify(key)} is not a dotted key path such as contexts.window`);

  const root = loadSchema();
  let node: SchemaNode = root;
  for (let i = 0; i < segments.length; i++) {
    const seg = segments[i];
    const props = node.properties;
    if (props === undefined || !Object.hasOwn(props, seg)) {
      if (props === undefined) fail(`${segments.slice(0, i).join('.')} has no keys below it (it is ${describeLeaf(node)})`);
      fail(unknownKeyMessage(root, node, segments.slice(0, i).join('.'), seg));
    }
    node = (props as Record<string, SchemaNode>)[seg];
  }

  const candidates: unknown[] = [];
  try {
    candidates.push(JSON.parse(text) as unknown);
  } catch {
    // not JSON: the plain string below is the only reading
  }
  if (candidates.length === 0 || typeof candidates[0] !== 'string') candidates.push(text);

  let firstIssues: ConfigIssue[] | undefined;
  let accepted: { value: unknown } | undefined;
  for (const candidate of candidates) {
    const issues: ConfigIssue[] = [];
    resolveNode(root, node, candidate, key, issues);
    if (issues.length === 0) {
      accepted = { value: candidate };
      break;
    }
    firstIssues ??= issues;
  }
  if (accepted === undefined) return fail(formatIssues(firstIssues ?? []));

  let target: Record<string, unknown> = raw;
  for (let i = 0; i < segments.length - 1; i++) {
    const seg = segments[i];
    if (!Object.hasOwn(target, seg)) target[seg] = {};
    const next = target[seg];
    if (!isPlainObject(next)) {
      fail(`cannot set ${key}: ${segments.slice(0, i + 1).join('.')} in the config is ${showValue(next)}, not an object`);
    }
    target = next as Record<string, unknown>;
  }
  target[segments[segments.length - 1]] = accepted.value;
}

function describeLeaf(node: SchemaNode): string {
  if (node.enum !== undefined) return `one of ${node.enum.map(String).join(', ')}`;
  if (node.oneOf !== undefined) return node.oneOf.map(describeLeaf).join(' or ');
  if (node.type === undefined) return 'a value';
  return node.type === 'null' ? 'null' : `${/^[aeiou]/.test(node.type) ? 'an' : 'a'} ${node.type}`;
}
