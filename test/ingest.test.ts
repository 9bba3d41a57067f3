import { chmodSync, mkdirSync, mkdtempSync, rmSync, statSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import path from 'node:path';
import { gzipSync } from 'node:zlib';
import { afterAll, describe, expect, it } from 'vitest';
import type { InputConfig } from '../src/config/types.js';
import { KindredError } from '../src/errors.js';
import { emptyIngestStats, readDocuments, type Document, type IngestStats } from '../src/ingest/index.js';
import { READ_CHUNK_BYTES } from '../src/ingest/bytes.js';

const tmp = mkdtempSync(path.join(tmpdir(), 'kindred-ingest-'));
afterAll(() => rmSync(tmp, { recursive: true, force: true }));

const INPUT: InputConfig = { paths: [], format: 'auto', textField: 'text', idField: null, onBadRecord: 'fail' };

let fileCounter = 0;
/** Writes a fixture file in a fresh folder and returns its absolute path. */
function fixture(name: string, content: string | Buffer): string {
  const dir = path.join(tmp, `f${fileCounter++}`);
  mkdirSync(dir);
  const file = path.join(dir, name);
  writeFileSync(file, content);
  return file;
}

async function read(
  files: string[],
  input: Partial<InputConfig> = {},
  onProgress?: (n: number) => void,
): Promise<{ docs: Document[]; stats: IngestStats }> {
  const stats = emptyIngestStats();
  const docs: Document[] = [];
  for await (const d of readDocuments(files, { ...INPUT, ...input }, stats, onProgress)) docs.push(d);
  return { docs, stats };
}

async function readError(files: string[], input: Partial<InputConfig> = {}): Promise<Error> {
  const err = await read(files, input).then(
    () => null,
    (e: unknown) => e,
  );
  expect(err).toBeInstanceOf(KindredError);
  const message = (err as Error).message;
  expect(message).not.toContain('\n');
  expect(message).not.toMatch(/\bat .*\.(ts|js):\d+/); // no stack frames
  return err as Error;
}

const brief = (docs: Document[]): Array<[number, string | null, string]> => docs.map((d) => [d.line, d.id, d.text]);

describe('text-lines', () => {
  it('one document per line with 1-based line numbers; blank lines skipped; CRLF and BOM removed', async () => {
    const file = fixture('reviews.txt', '\uFEFFThe kettle from Larkspur Kitchen Supply\r\n\r\n   \nworks well\nlast line without newline');
    const { docs, stats } = await read([file]);
    expect(brief(docs)).toEqual([
      [1, null, 'The kettle from Larkspur Kitchen Supply'],
      [4, null, 'works well'],
      [5, null, 'last line without newline'],
    ]);
    expect(docs.every((d) => d.file === file)).toBe(true);
    expect(stats).toEqual({ files: 1, bytes: statSync(file).size, documents: 3, invalidUtf8Replaced: 0, badRecordsSkipped: 0, binaryFilesSkipped: 0 });
  });

  it('an empty file gives no documents', async () => {
    const { docs, stats } = await read([fixture('empty.txt', '')]);
    expect(docs).toEqual([]);
    expect(stats.files).toBe(1);
  });

  it('a line longer than several read chunks is one document', async () => {
    const long = 'ab'.repeat(3 * READ_CHUNK_BYTES) + 'z';
    const { docs } = await read([fixture('long.txt', `first\n${long}\nlast\n`)]);
    expect(docs.map((d) => d.text.length)).toEqual([5, long.length, 4]);
    expect(docs[1].text).toBe(long);
    expect(docs[2].line).toBe(3);
  });
});

describe('text-file', () => {
  it('the whole file is one document on line 1', async () => {
    const file = fixture('note.md', 'Dear Orla,\nthe teapot arrived.\n');
    const { docs } = await read([file], { format: 'text-file' });
    expect(brief(docs)).toEqual([[1, null, 'Dear Orla,\nthe teapot arrived.\n']]);
  });

  it('a blank file gives no document', async () => {
    const { docs } = await read([fixture('blank.md', ' \n\n')], { format: 'text-file' });
    expect(docs).toEqual([]);
  });

  it('a multi-byte character split across two read chunks decodes whole', async () => {
    const text = 'x'.repeat(READ_CHUNK_BYTES - 1) + 'é' + '€'.repeat(10);
    const { docs, stats } = await read([fixture('split.txt', text)], { format: 'text-file' });
    expect(docs[0].text).toBe(text);
    expect(stats.invalidUtf8Replaced).toBe(0);
  });

  it('a genuine U+FFFD split across two read chunks is not counted as a replacement', async () => {
    for (const cut of [1, 2]) {
      const text = 'y'.repeat(READ_CHUNK_BYTES - cut) + '\uFFFD tail';
      const { docs, stats } = await read([fixture('fffd.txt', text)], { format: 'text-file' });
      expect(docs[0].text).toBe(text);
      expect(stats.invalidUtf8Replaced).toBe(0);
    }
  });
});

describe('jsonl', () => {
  const lines = [
    '{"review": {"body": "Sturdy pan", "stars": 5}, "sku": "LK-100"}',
    '',
    '{"review": {"body": "Lid rattles"}, "sku": 42}',
    '{"review": {"body": "No id here"}}',
  ].join('\n');

  it('reads the dotted text field and the id field (a number id becomes a string)', async () => {
    const { docs } = await read([fixture('reviews.jsonl', lines)], { textField: 'review.body', idField: 'sku' });
    expect(brief(docs)).toEqual([
      [1, 'LK-100', 'Sturdy pan'],
      [3, '42', 'Lid rattles'],
      [4, null, 'No id here'],
    ]);
  });

  it('without idField every id is null', async () => {
    const { docs } = await read([fixture('reviews.jsonl', lines)], { textField: 'review.body' });
    expect(docs.map((d) => d.id)).toEqual([null, null, null]);
  });

  it('a broken line fails with file:line under onBadRecord "fail"', async () => {
    const file = fixture('broken.jsonl', '{"text": "fine"}\n{"text": "cut off\n{"text": "fine again"}\n');
    const err = await readError([file]);
    expect(err.message).toMatch(new RegExp(`^${escape(file)}:2: invalid JSON record \\(`));
    expect(err.message).toContain('input.onBadRecord');
  });

  it.each([
    ['[1, 2]', 'expected an object, got an array'],
    ['"just text"', 'expected an object, got a string'],
    ['{"body": "x"}', 'text field "text" is missing'],
    ['{"text": 12}', 'text field "text" is a number, not a string'],
    ['{"text": null}', 'text field "text" is null, not a string'],
  ])('record %s fails with reason "%s"', async (record, reason) => {
    const file = fixture('bad.jsonl', `{"text": "ok"}\n${record}\n`);
    const err = await readError([file]);
    expect(err.message).toContain(`${file}:2: invalid JSON record (${reason})`);
  });

  it('an id of the wrong type is a bad record', async () => {
    const file = fixture('bad-id.jsonl', '{"text": "ok", "id": {"a": 1}}\n');
    const err = await readError([file], { idField: 'id' });
    expect(err.message).toContain(`${file}:1: invalid JSON record (id field "id" is an object, not a string or number)`);
  });

  it('onBadRecord "skip" skips and counts every kind of bad record', async () => {
    const file = fixture(
      'mixed.jsonl',
      ['{"text": "one"}', '{oops', '[]', '{"text": 3}', '{"other": "x"}', '{"text": "two"}', 'null'].join('\n'),
    );
    const { docs, stats } = await read([file], { onBadRecord: 'skip' });
    expect(brief(docs)).toEqual([
      [1, null, 'one'],
      [6, null, 'two'],
    ]);
    expect(stats.badRecordsSkipped).toBe(5);
    expect(stats.documents).toBe(2);
  });

  it('an empty text string is still a document', async () => {
    const { docs } = await read([fixture('e.jsonl', '{"text": ""}\n')]);
    expect(brief(docs)).toEqual([[1, null, '']]);
  });
});

describe('json-array', () => {
  it('streams the elements; line is the element index + 1', async () => {
    const file = fixture(
      'catalogue.json',
      JSON.stringify(
        [
          { id: 'A1', info: { text: 'Copper whisk' } },
          { id: 7, info: { text: 'Oak board' } },
          { info: { text: 'Linen apron' } },
        ],
        null,
        2,
      ),
    );
    const { docs } = await read([file], { textField: 'info.text', idField: 'id' });
    expect(brief(docs)).toEqual([
      [1, 'A1', 'Copper whisk'],
      [2, '7', 'Oak board'],
      [3, null, 'Linen apron'],
    ]);
  });

  it('an empty file, a blank file and an empty array give no documents', async () => {
    for (const content of ['', '  \n', '[]', '\uFEFF[ ]\n']) {
      const { docs } = await read([fixture('none.json', content)]);
      expect(docs).toEqual([]);
    }
  });

  it('elements spread over many read chunks are all read', async () => {
    const items = Array.from({ length: 4000 }, (_, i) => ({ text: `item ${i} ${'ü'.repeat(i % 50)}` }));
    const { docs } = await read([fixture('many.json', JSON.stringify(items))]);
    expect(docs.length).toBe(4000);
    expect(docs[3999].text).toBe(items[3999].text);
    expect(docs[1234].line).toBe(1235);
  });

  it('broken JSON fails naming the file and the line', async () => {
    const file = fixture('broken.json', '[\n  {"text": "a"},\n  {"text": "b",,}\n]\n');
    const err = await readError([file]);
    expect(err.message).toMatch(new RegExp(`^${escape(file)}:3: invalid JSON \\(`));
  });

  it.each([
    ['a bad literal', '{"text": tru}'],
    ['a bad number', '{"text": "b", "n": 1.}'],
    ['a bad escape', '{"text": "b\\q"}'],
    ['a missing colon', '{"text" "b"}'],
  ])('%s is reported on its own line, not the next', async (_what, record) => {
    const file = fixture('short.json', `[\n  {"text": "a"},\n  ${record},\n  {"text": "c"}\n]\n`);
    const err = await readError([file]);
    expect(err.message).toMatch(new RegExp(`^${escape(file)}:3: invalid JSON \\(`));
  });

  it('broken JSON deep in a large file is located on its line', async () => {
    const good = Array.from({ length: 3000 }, (_, i) => `  {"text": "entry ${i}"},`).join('\n');
    const file = fixture('late-break.json', `[\n${good}\n  {"text": "x" "y"}\n]\n`);
    const err = await readError([file]);
    expect(err.message).toMatch(new RegExp(`^${escape(file)}:3002: invalid JSON \\(`));
  });

  it('a truncated array fails naming the file', async () => {
    const file = fixture('cut.json', '[{"text": "a"}, {"text": "b"');
    const err = await readError([file]);
    expect(err.message).toMatch(new RegExp(`^${escape(file)}:1: invalid JSON \\(`));
  });

  it('a top-level object is not an array', async () => {
    const file = fixture('object.json', '{"text": "a"}');
    const err = await readError([file]);
    expect(err.message).toContain(`${file}:1: invalid JSON (the top-level value is not an array)`);
  });

  it('a bad element follows onBadRecord', async () => {
    const file = fixture('elements.json', '[{"text": "a"}, 5, {"body": "b"}, {"text": "c"}]');
    const err = await readError([file]);
    expect(err.message).toContain(`${file}: array element 2: invalid JSON record (expected an object, got a number)`);
    const { docs, stats } = await read([file], { onBadRecord: 'skip' });
    expect(brief(docs)).toEqual([
      [1, null, 'a'],
      [4, null, 'c'],
    ]);
    expect(stats.badRecordsSkipped).toBe(2);
  });
});

describe('format auto', () => {
  it('chooses by extension after removing .gz', async () => {
    const jsonl = fixture('a.JSONL', '{"text": "from jsonl"}\n');
    const ndjson = fixture('b.ndjson.gz', gzipSync('{"text": "from ndjson"}\n'));
    const array = fixture('c.json.gz', gzipSync('[{"text": "from array"}]'));
    const lines = fixture('d.log', '{"text": "a text line"}\n');
    const { docs } = await read([jsonl, ndjson, array, lines]);
    expect(docs.map((d) => d.text)).toEqual(['from jsonl', 'from ndjson', 'from array', '{"text": "a text line"}']);
  });

  it('a configured format overrides the extension', async () => {
    const file = fixture('data.txt', '{"text": "as jsonl"}\n');
    const { docs } = await read([file], { format: 'jsonl' });
    expect(docs.map((d) => d.text)).toEqual(['as jsonl']);
  });
});

describe('gzip', () => {
  it('is detected by magic bytes: a gzipped .txt is decompressed, a plain .gz is read as is', async () => {
    const gzippedTxt = fixture('packed.txt', gzipSync('\uFEFFfirst line\nsecond line\n'));
    const plainGz = fixture('plain.txt.gz', 'not compressed\n');
    const { docs, stats } = await read([gzippedTxt, plainGz]);
    expect(docs.map((d) => d.text)).toEqual(['first line', 'second line', 'not compressed']);
    expect(stats.bytes).toBe(statSync(gzippedTxt).size + statSync(plainGz).size);
  });

  it('reads concatenated gzip members', async () => {
    const file = fixture('members.gz', Buffer.concat([gzipSync('one\n'), gzipSync('two\n')]));
    const { docs } = await read([file]);
    expect(docs.map((d) => d.text)).toEqual(['one', 'two']);
  });

  it('truncated gzip data is an error naming the file', async () => {
    const whole = gzipSync('line of text\n'.repeat(5000));
    const file = fixture('cut.txt.gz', whole.subarray(0, whole.length - 40));
    const err = await readError([file]);
    expect(err.message).toMatch(new RegExp(`^${escape(file)}: truncated or corrupt gzip data \\(`));
  });

  it('corrupt gzip data is an error naming the file', async () => {
    const bytes = Buffer.from(gzipSync('line of text\n'.repeat(5000)));
    for (let i = 20; i < 60; i++) bytes[i] ^= 0x5a;
    const file = fixture('bad.jsonl.gz', bytes);
    const err = await readError([file]);
    expect(err.message).toMatch(new RegExp(`^${escape(file)}: truncated or corrupt gzip data \\(`));
  });
});

describe('invalid UTF-8', () => {
  const bad = Buffer.concat([
    Buffer.from('ok ? '),
    Buffer.from([0xff]),
    Buffer.from(' mid '),
    Buffer.from([0xe2, 0x82]), // truncated three-byte character: one replacement
    Buffer.from(' real \uFFFD end\n'), // a genuine U+FFFD is not a replacement
    Buffer.from([0xc0, 0xaf, 0x0a]), // overlong encoding: two replacements
  ]);

  it.each(['text-lines', 'text-file'] as const)('is replaced by U+FFFD and counted (%s)', async (format) => {
    const { docs, stats } = await read([fixture('bad.txt', bad)], { format });
    expect(docs.map((d) => d.text).join('\n')).toContain('ok ? \uFFFD mid \uFFFD real \uFFFD end');
    expect(stats.invalidUtf8Replaced).toBe(4);
  });

  it('is counted in jsonl and json-array records', async () => {
    const record = Buffer.concat([Buffer.from('{"text": "caf'), Buffer.from([0xe9]), Buffer.from('"}')]);
    const jsonl = fixture('latin1.jsonl', Buffer.concat([record, Buffer.from('\n'), record]));
    const array = fixture('latin1.json', Buffer.concat([Buffer.from('['), record, Buffer.from(','), record, Buffer.from(']')]));
    const { docs, stats } = await read([jsonl, array]);
    expect(docs.map((d) => d.text)).toEqual(['caf\uFFFD', 'caf\uFFFD', 'caf\uFFFD', 'caf\uFFFD']);
    expect(stats.invalidUtf8Replaced).toBe(4);
  });
});

describe('file errors', () => {
  it('a missing file is an error naming the path', async () => {
    const missing = path.join(tmp, 'nowhere', 'missing.txt');
    const err = await readError([missing]);
    expect(err.message).toContain(missing);
    expect(err.message).toContain('ENOENT');
  });

  it('a directory given as a file is an error naming the path', async () => {
    const dir = path.join(tmp, 'a-directory');
    mkdirSync(dir, { recursive: true });
    const err = await readError([dir]);
    expect(err.message).toContain(dir);
    expect(err.message).toContain('EISDIR');
  });

  it.skipIf(process.getuid?.() === 0)('an unreadable file is an error naming the path', async () => {
    const file = fixture('locked.txt', 'secret\n');
    chmodSync(file, 0o000);
    const err = await readError([file]);
    expect(err.message).toContain(file);
    expect(err.message).toContain('EACCES');
  });
});

describe('stats and progress', () => {
  it('counts files, on-disk bytes and documents; progress is cumulative and ends at the byte total', async () => {
    const a = fixture('a.txt', 'one\ntwo\n'.repeat(20000));
    const b = fixture('b.jsonl.gz', gzipSync('{"text": "three"}\n'.repeat(10000)));
    const seen: number[] = [];
    const { stats } = await read([a, b], {}, (n) => seen.push(n));
    const total = statSync(a).size + statSync(b).size;
    expect(stats).toEqual({ files: 2, bytes: total, documents: 50000, invalidUtf8Replaced: 0, badRecordsSkipped: 0, binaryFilesSkipped: 0 });
    expect(seen.length).toBeGreaterThan(2);
    expect(seen.every((n, i) => i === 0 || n > seen[i - 1])).toBe(true);
    expect(seen[seen.length - 1]).toBe(total);
  });

  it('stopping early is allowed and leaves the counters consistent', async () => {
    const file = fixture('stop.txt', 'line\n'.repeat(100000));
    const stats = emptyIngestStats();
    let n = 0;
    for await (const _d of readDocuments([file], INPUT, stats)) if (++n === 10) break;
    expect(stats.documents).toBe(10);
  });
});

function escape(s: string): string {
  return s.replace(/[.*+?^${}()|[\]\\]/g, '\\$&');
}
