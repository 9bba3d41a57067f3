/**
 * Finds where a JSON text goes wrong, for messages that name line and column.
 * JSON.parse does the real parsing; this scanner only locates the first syntax error (V8's messages do not
 * always carry a position) and the first duplicate object key (JSON.parse silently keeps the last one).
 */

export interface JsonProblem {
  /** Offset into the text, in UTF-16 code units. */
  offset: number;
  reason: string;
}

class ScanStop {
  constructor(readonly problem: JsonProblem) {}
}

const WHITESPACE = new Set([0x20, 0x09, 0x0a, 0x0d]);

/** Returns the first syntax error or duplicate key in `text`, or null when it is valid JSON without duplicate keys. */
export function findJsonProblem(text: string): JsonProblem | null {
  let pos = 0;
  const stop = (reason: string, at: number = pos): never => {
    throw new ScanStop({ offset: at, reason });
  };
  const describeHere = (): string => {
    if (pos >= text.length) return 'the end of the file';
    const cp = text.codePointAt(pos) ?? 0;
    const ch = String.fromCodePoint(cp);
    return cp < 0x20 ? `character U+${cp.toString(16).toUpperCase().padStart(4, '0')}` : `'${ch}'`;
  };
  const skipWhitespace = (): void => {
    while (pos < text.length && WHITESPACE.has(text.charCodeAt(pos))) pos++;
  };
  const failUnexpected = (expected: string): never => {
    if (pos < text.length && text[pos] === '/' && (text[pos + 1] === '/' || text[pos + 1] === '*')) {
      return stop('comments are not allowed in JSON');
    }
    return stop(`expected ${expected}, found ${describeHere()}`);
  };

  const scanString = (): string => {
    const start = pos;
    pos++; // opening quote
    while (true) {
      if (pos >= text.length) stop('unterminated string', start);
      const c = text.charCodeAt(pos);
      if (c === 0x22) {
        pos++;
        return JSON.parse(text.slice(start, pos)) as string;
      }
      if (c === 0x0a || c === 0x0d) stop('line break inside a string (missing closing quote?)');
      if (c < 0x20) stop(`control character U+${c.toString(16).toUpperCase().padStart(4, '0')} inside a string (write it as an escape)`);
      if (c === 0x5c) {
        const e = text[pos + 1];
        if (e === undefined) stop('unterminated string', start);
        if (e === 'u') {
          if (!/^[0-9a-fA-F]{4}$/.test(text.slice(pos + 2, pos + 6))) stop('invalid \\u escape (needs four hex digits)');
          pos += 6;
        } else if ('"\\/bfnrt'.includes(e)) {
          pos += 2;
        } else {
          stop(`invalid escape \\${e}`);
        }
        continue;
      }
      pos++;
    }
  };

  const scanNumber = (): void => {
    const start = pos;
    const m = /-?(?:0|[1-9][0-9]*)(?:\.[0-9]+)?(?:[eE][+-]?[0-9]+)?/y;
    m.lastIndex = pos;
    const found = m.exec(text);
    if (found === null || found[0] === '-' || found[0] === '') stop('invalid number', start);
    pos += (found as RegExpExecArray)[0].length;
    // A number glued to more digits or letters ("01", "1.", "1e") is malformed.
    if (pos < text.length && /[0-9A-Za-z.+\-]/.test(text[pos])) stop('invalid number', start);
  };

  const scanValue = (): void => {
    skipWhitespace();
    if (pos >= text.length) stop('unexpected end of the file, expected a value');
    const c = text[pos];
    if (c === '{') return scanObject();
    if (c === '[') return scanArray();
    if (c === '"') {
      scanString();
      return;
    }
    if (c === '-' || (c >= '0' && c <= '9')) return scanNumber();
    for (const word of ['true', 'false', 'null']) {
      if (text.startsWith(word, pos)) {
        pos += word.length;
        if (pos < text.length && /[0-9A-Za-z_$]/.test(text[pos])) stop(`unexpected word after ${word}`);
        return;
      }
    }
    if (c === "'") stop('strings must use double quotes');
    failUnexpected('a value');
  };

  const scanObject = (): void => {
    pos++; // {
    const seen = new Set<string>();
    skipWhitespace();
    if (text[pos] === '}') {
      pos++;
      return;
    }
    while (true) {
      skipWhitespace();
      if (text[pos] === '}') stop('trailing comma before "}"');
      if (text[pos] !== '"') {
        if (text[pos] === "'") stop('keys must use double quotes');
        failUnexpected('a key in double quotes');
      }
      const keyStart = pos;
      const key = scanString();
      if (seen.has(key)) stop(`duplicate key ${JSON.stringify(key)}`, keyStart);
      seen.add(key);
      skipWhitespace();
      if (text[pos] !== ':') failUnexpected('":" after the key');
      pos++;
      scanValue();
      skipWhitespace();
      if (text[pos] === ',') {
        pos++;
        continue;
      }
      if (text[pos] === '}') {
        pos++;
        return;
      }
      if (pos >= text.length) stop('unexpected end of the file, expected "," or "}"');
      failUnexpected('"," or "}"');
    }
  };

  const scanArray = (): void => {
    pos++; // [
    skipWhitespace();
    if (text[pos] === ']') {
      pos++;
      return;
    }
    while (true) {
      skipWhitespace();
      if (text[pos] === ']') stop('trailing comma before "]"');
      scanValue();
      skipWhitespace();
      if (text[pos] === ',') {
        pos++;
        continue;
      }
      if (text[pos] === ']') {
        pos++;
        return;
      }
      if (pos >= text.length) stop('unexpected end of the file, expected "," or "]"');
      failUnexpected('"," or "]"');
    }
  };

  try {
    scanValue();
    skipWhitespace();
    if (pos < text.length) failUnexpected('the end of the file after the top-level value');
    return null;
  } catch (e) {
    if (e instanceof ScanStop) return e.problem;
    throw e;
  }
}

/** 1-based line and column of an offset; columns count characters (code points), a tab counts as one. */
export function lineColumn(text: string, offset: number): { line: number; column: number } {
  let line = 1;
  let lineStart = 0;
  const end = Math.min(offset, text.length);
  for (let i = 0; i < end; i++) {
    if (text.charCodeAt(i) === 0x0a) {
      line++;
      lineStart = i + 1;
    }
  }
  return { line, column: [...text.slice(lineStart, end)].length + 1 };
}
