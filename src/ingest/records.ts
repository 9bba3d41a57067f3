/** Extraction of the text and id of one JSON record by dotted field paths. */

/** A parsed dotted field path, e.g. "review.body" -> ["review", "body"]. */
export type FieldPath = readonly string[];

export function parseFieldPath(dotted: string): FieldPath {
  return dotted.split('.');
}

/** Outcome of reading one record: a text and id, or the reason the record is unusable. */
export type RecordFields = { ok: true; text: string; id: string | null } | { ok: false; reason: string };

function kindOf(value: unknown): string {
  if (value === null) return 'null';
  if (Array.isArray(value)) return 'an array';
  if (typeof value === 'object') return 'an object';
  return `a ${typeof value}`;
}

/** Own-property lookup along a path; undefined when any step is missing or not an object. */
function lookup(record: Record<string, unknown>, fieldPath: FieldPath): unknown {
  let current: unknown = record;
  for (const key of fieldPath) {
    if (typeof current !== 'object' || current === null || Array.isArray(current)) return undefined;
    if (!Object.hasOwn(current, key)) return undefined;
    current = (current as Record<string, unknown>)[key];
  }
  return current;
}

/**
 * Reads the text field (must be a string) and the id field (a string or a finite number, written as a
 * string; missing or null gives a null id) of a parsed JSON value.
 */
export function recordFields(
  value: unknown,
  textPath: FieldPath,
  textField: string,
  idPath: FieldPath | null,
  idField: string | null,
): RecordFields {
  if (typeof value !== 'object' || value === null || Array.isArray(value)) {
    return { ok: false, reason: `expected an object, got ${kindOf(value)}` };
  }
  const record = value as Record<string, unknown>;
  const text = lookup(record, textPath);
  if (text === undefined) return { ok: false, reason: `text field "${textField}" is missing` };
  if (typeof text !== 'string') return { ok: false, reason: `text field "${textField}" is ${kindOf(text)}, not a string` };
  // a NUL character is never text (docs/reliability.md): the record is bad, like a binary file
  if (text.indexOf('\0') !== -1) return { ok: false, reason: `text field "${textField}" holds a NUL character (binary data?)` };
  let id: string | null = null;
  if (idPath !== null) {
    const raw = lookup(record, idPath);
    if (typeof raw === 'string') id = raw;
    else if (typeof raw === 'number' && Number.isFinite(raw)) id = String(raw);
    else if (raw !== undefined && raw !== null) {
      return { ok: false, reason: `id field "${idField}" is ${kindOf(raw)}, not a string or number` };
    }
  }
  return { ok: true, text, id };
}
