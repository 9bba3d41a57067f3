import { mkdtempSync, mkdirSync, rmSync, writeFileSync } from 'node:fs';
import os from 'node:os';
import path from 'node:path';
import { afterAll, describe, expect, it } from 'vitest';
import { configHash, loadConfig } from '../src/config/index.js';
import { findJsonProblem, lineColumn } from '../src/config/jsonText.js';
import { isKindredError } from '../src/errors.js';
import { pythonAvailable, runPythonJson } from './helpers/python.js';

const dir = mkdtempSync(path.join(os.tmpdir(), 'kindred-config-'));
afterAll(() => rmSync(dir, { recursive: true, force: true }));

function write(name: string, text: string): string {
  const file = path.join(dir, name);
  mkdirSync(path.dirname(file), { recursive: true });
  writeFileSync(file, text);
  return file;
}

async function rejection(p: Promise<unknown>): Promise<string> {
  try {
    await p;
  } catch (e) {
    if (!isKindredError(e)) throw e;
    return e.message;
  }
  throw new Error('expected a KindredError');
}

describe('loadConfig', () => {
  it('reads, applies overrides, fills defaults, and reports folder, absolute file and hash', async () => {
    const file = write('jobs/nightly.json', JSON.stringify({ input: { paths: ['../corpus/*.jsonl'], format: 'jsonl' }, contexts: { window: 2 } }));
    const loaded = await loadConfig(file, ['contexts.window=3', 'weighting.scheme=pmi', 'tokenize.stopwords=stop.txt']);
    expect(loaded.config.input).toEqual({ paths: ['../corpus/*.jsonl'], format: 'jsonl', textField: 'text', idField: null, onBadRecord: 'fail' });
    expect(loaded.config.contexts.window).toBe(3);
    expect(loaded.config.weighting.scheme).toBe('pmi');
    expect(loaded.config.tokenize.stopwords).toBe('stop.txt');
    expect(loaded.baseDir).toBe(path.join(dir, 'jobs'));
    expect(loaded.file).toBe(file);
    expect(loaded.hash).toBe(configHash(loaded.config));
    expect(loaded.hash).toMatch(/^[0-9a-f]{64}$/);
  });

  it('a relative config path gives an absolute folder', async () => {
    write('rel.json', '{"input":{"paths":["a.txt"]}}');
    const rel = path.relative(process.cwd(), path.join(dir, 'rel.json'));
    const loaded = await loadConfig(rel, []);
    expect(path.isAbsolute(loaded.baseDir)).toBe(true);
    expect(loaded.baseDir).toBe(dir);
  });

  it('overrides are applied before validation, so --set can repair a bad value', async () => {
    const file = write('bad-window.json', '{"input":{"paths":["a"]},"contexts":{"window":0}}');
    expect(await rejection(loadConfig(file, []))).toBe(`config ${file}: contexts.window: 0 is below the minimum 1`);
    expect((await loadConfig(file, ['contexts.window=4'])).config.contexts.window).toBe(4);
  });

  it('cross-key errors see the overrides', async () => {
    const file = write('tfidf.json', '{"input":{"paths":["a"]},"weighting":{"scheme":"tfidf"}}');
    expect((await loadConfig(file, ['contexts.type=document'])).config.contexts.type).toBe('document');
    expect(await rejection(loadConfig(file, []))).toContain('weighting.scheme "tfidf" requires contexts.type "document"');
  });

  it('names the assignment when an override is bad', async () => {
    const file = write('ok.json', '{"input":{"paths":["a"]}}');
    expect(await rejection(loadConfig(file, ['contexts.window=abc']))).toBe('--set contexts.window=abc: contexts.window: "abc" is not an integer');
  });

  it('accepts a byte-order mark and "$schema"', async () => {
    const file = write('bom.json', '\uFEFF{"$schema":"../configs/kindred.schema.json","input":{"paths":["a"]}}');
    const loaded = await loadConfig(file, []);
    expect(loaded.config.input.paths).toEqual(['a']);
  });

  it('a missing file names the file', async () => {
    const file = path.join(dir, 'nope.json');
    expect(await rejection(loadConfig(file, []))).toBe(`config ${file}: file not found; check the path given for the config file`);
  });

  it('a directory names the path', async () => {
    expect(await rejection(loadConfig(dir, []))).toBe(`config ${dir}: is a directory, not a file; check the path given for the config file`);
  });

  it('a top level that is not an object is reported before overrides run', async () => {
    const file = write('array.json', '[1]');
    expect(await rejection(loadConfig(file, ['contexts.window=3']))).toBe(`config ${file}: the top level must be an object, found [1]`);
  });
});

describe('JSON syntax errors name file, line and column', () => {
  const cases: Array<[string, string, string]> = [
    ['missing comma', '{\n  "input": { "paths": ["a.txt"] },\n  "contexts": { "window": 3 "type": "window" }\n}\n', `line 3, column 29: expected "," or "}", found '"'`],
    ['trailing comma', '{\n  "input": { "paths": ["a.txt"], },\n}\n', 'line 2, column 34: trailing comma before "}"'],
    ['comment', '{\n  // corpus\n  "input": {}\n}', 'line 2, column 3: comments are not allowed in JSON'],
    ['single quotes', "{\n  'input': {}\n}", 'line 2, column 3: keys must use double quotes'],
    ['string running past the line end', '{\n  "input": {"paths": ["a.txt]}}\n', 'line 2, column 32: line break inside a string (missing closing quote?)'],
    ['unterminated string at the end of the file', '{"input": {"paths": ["a.txt', 'line 1, column 22: unterminated string'],
    ['truncated file', '{\n  "input": {"paths": ["a.txt"]', 'line 2, column 31: unexpected end of the file, expected "," or "}"'],
    ['empty file', '', 'line 1, column 1: unexpected end of the file, expected a value'],
    ['bare word', '{"input": {"format": jsonl}}', "line 1, column 22: expected a value, found 'j'"],
    ['leading zero', '{"memoryMiB": 0128}', 'line 1, column 15: invalid number'],
    ['text after the end', '{"input": {}}\n}', "line 2, column 1: expected the end of the file after the top-level value, found '}'"],
    ['raw tab in a string', '{"input": {"textField": "a\tb"}}', 'line 1, column 27: control character U+0009 inside a string (write it as an escape)'],
    ['column counts characters, not bytes', '{"input": {"textField": "\u00e9\u00e9" "x"}}', `line 1, column 30: expected "," or "}", found '"'`],
  ];
  for (const [name, text, expected] of cases) {
    it(name, async () => {
      const file = write(`syntax-${name.replace(/\W+/g, '-')}.json`, text);
      const message = await rejection(loadConfig(file, []));
      expect(message).toBe(`config ${file}: invalid JSON at ${expected}`);
      expect(message).not.toContain('\n');
    });
  }

  it('a duplicate key is an error at the second occurrence', async () => {
    const file = write('dup.json', '{\n  "input": {"paths": ["a"]},\n  "contexts": {"window": 3,\n    "window": 4}\n}');
    expect(await rejection(loadConfig(file, []))).toBe(`config ${file}: duplicate key "window" at line 4, column 5; keep one of them`);
  });

  it.skipIf(!pythonAvailable())('line and column agree with python json.JSONDecodeError (lineno, colno)', () => {
    // Reference: python3 json module's decoder positions; only cases where both parsers point at the same spot by design.
    const texts = [
      '{\n  "input": { "paths": ["a.txt"] },\n  "contexts": { "window": 3 "type": "window" }\n}\n',
      '{\n  "input": {"paths": ["a.txt]}}\n',
      '{"input": {"format": jsonl}}',
      '{"input": {}}\n}',
      '{"input": {"textField": "a\tb"}}',
      '{"input": {"textField": "\u00e9\u00e9" "x"}}',
      '{\n\n   "a" 1}',
      '[1, 2,, 3]',
    ];
    const py = runPythonJson<Array<[number, number]>>(
      [
        '-c',
        'import json,sys\nout=[]\nfor t in json.load(sys.stdin):\n  try:\n    json.loads(t); out.append([0,0])\n  except json.JSONDecodeError as e:\n    out.append([e.lineno,e.colno])\nprint(json.dumps(out))',
      ],
      texts,
    );
    const ours = texts.map((t) => {
      const p = findJsonProblem(t);
      if (p === null) return [0, 0];
      const { line, column } = lineColumn(t, p.offset);
      return [line, column];
    });
    expect(ours).toEqual(py);
  });

  it('the scanner accepts exactly what JSON.parse accepts, over every one-character edit of a config (reference: V8 JSON.parse)', () => {
    const valid = JSON.stringify(
      { $schema: 'x', input: { paths: ['a b.txt', 'd/\u00e9\\"q"'], idField: null }, contexts: { window: 12 }, weighting: { smoothing: 0.75, shift: 1e2 }, tokenize: { lowercase: false } },
      null,
      1,
    );
    expect(findJsonProblem(valid)).toBeNull();
    const inserts = [',', '}', ']', '"', 'x', '0', '-', '.', '\\', ' ', ':', '\t', 'e'];
    let checked = 0;
    for (let i = 0; i <= valid.length; i++) {
      const variants = [valid.slice(0, i) + valid.slice(i + 1), ...inserts.map((c) => valid.slice(0, i) + c + valid.slice(i))];
      for (const t of variants) {
        let parses = true;
        try {
          JSON.parse(t);
        } catch {
          parses = false;
        }
        const p = findJsonProblem(t);
        const scannerAccepts = p === null || p.reason.startsWith('duplicate key');
        if (scannerAccepts !== parses) throw new Error(`scanner ${scannerAccepts ? 'accepts' : 'rejects'} what JSON.parse ${parses ? 'accepts' : 'rejects'}: ${JSON.stringify(t)}`);
        checked++;
      }
    }
    expect(checked).toBeGreaterThan(2000);
  });
});
