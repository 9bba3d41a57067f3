/**
 * Bad input, reader by reader (text-lines, text-file, jsonl, json-array; plain and gzip): binary files, invalid
 * UTF-8, NUL bytes, truncated gzip, broken and non-object records, a missing text field, empty files, overlong
 * lines, a 100 MB single line, and file-system trouble (a FIFO, a dangling symlink, a symlink loop, a directory
 * where a file was). Every case ends in a one-line KindredError naming the file (and line where there is one),
 * or, under input.onBadRecord "skip", a counted skip. Both reading paths are checked and must agree: the
 * streaming readers (readDocuments) and the split readers the build uses (planSplits + readSplit).
 */
import { execFileSync } from 'node:child_process';
import { mkdirSync, mkdtempSync, readFileSync, rmSync, symlinkSync, writeFileSync, openSync, writeSync, closeSync } from 'node:fs';
import { tmpdir } from 'node:os';
import path from 'node:path';
import { gzipSync } from 'node:zlib';
import { afterAll, describe, expect, it } from 'vitest';
import type { InputConfig, InputFormat } from '../src/config/types.js';
import { KindredError } from '../src/errors.js';
import { emptyIngestStats, readDocuments, resolveInputs, type IngestStats } from '../src/ingest/index.js';
import { planSplits, readSplit } from '../src/ingest/split.js';

const tmp = mkdtempSync(path.join(tmpdir(), 'kindred-bad-input-'));
afterAll(() => rmSync(tmp, { recursive: true, force: true }));

const FORMATS = ['text-lines', 'text-file', 'jsonl', 'json-array'] as const;
type Format = (typeof FORMATS)[number];
const EXT: Record<Format, string> = { 'text-lines': 'txt', 'text-file': 'md', jsonl: 'jsonl', 'json-array': 'json' };
const COMPRESSIONS = ['plain', 'gzip'] as const;

let counter = 0;
function write(name: string, content: Buffer, gzip: boolean): string {
  const dir = path.join(tmp, `f${counter++}`);
  mkdirSync(dir);
  const file = path.join(dir, gzip ? `${name}.gz` : name);
  writeFileSync(file, gzip ? gzipSync(content) : content);
  return file;
}

/** A well-formed file of the format holding texts; the marker "@@" in a text is replaced by `raw` bytes. */
function encode(format: Format, texts: string[], raw: Buffer = Buffer.alloc(0)): Buffer {
  let text: string;
  if (format === 'text-lines') text = texts.join('\n') + '\n';
  else if (format === 'text-file') text = texts.join('\n');
  else if (format === 'jsonl') text = texts.map((t) => JSON.stringify({ text: t })).join('\n') + '\n';
  else text = '[\n' + texts.map((t) => JSON.stringify({ text: t })).join(',\n') + '\n]\n';
  const parts = text.split('@@');
  return Buffer.concat(parts.flatMap((p, i) => (i === 0 ? [Buffer.from(p)] : [raw, Buffer.from(p)])));
}

const input = (format: Format, onBadRecord: 'fail' | 'skip' = 'fail'): InputConfig => ({
  paths: [], format: format as InputFormat, textField: 'text', idField: null, onBadRecord,
});

type Outcome = { error: string } | { texts: string[]; stats: IngestStats };

async function viaReaders(files: string[], cfg: InputConfig, maxDocumentBytes?: number): Promise<Outcome> {
  const stats = emptyIngestStats();
  const texts: string[] = [];
  try {
    for await (const d of readDocuments(files, cfg, stats, undefined, { maxDocumentBytes })) texts.push(d.text);
  } catch (e) {
    return { error: describeError(e) };
  }
  return { texts, stats };
}

/** The build's reading path: files cut into small byte-range splits, each read by readSplit. */
async function viaSplits(files: string[], cfg: InputConfig, maxDocumentBytes?: number): Promise<Outcome> {
  const stats = emptyIngestStats();
  const texts: string[] = [];
  const decoder = new TextDecoder();
  const sink = { bytes: (b: Uint8Array, s: number, e: number) => texts.push(decoder.decode(b.subarray(s, e))), text: (t: string) => texts.push(t) };
  try {
    for (const split of planSplits(files, cfg, 4096)) await readSplit(split, cfg, stats, sink, () => {}, maxDocumentBytes);
  } catch (e) {
    return { error: describeError(e) };
  }
  return { texts, stats };
}

function describeError(e: unknown): string {
  expect(e, String((e as Error)?.stack)).toBeInstanceOf(KindredError);
  const m = (e as Error).message;
  expect(m).not.toContain('\n');
  return m;
}

/** Reads both ways; they must agree (the split path's byte count may differ in what it reads twice). */
async function read(files: string[], cfg: InputConfig, maxDocumentBytes?: number): Promise<Outcome> {
  const a = await viaReaders(files, cfg, maxDocumentBytes);
  const b = await viaSplits(files, cfg, maxDocumentBytes);
  if ('error' in a) expect(b).toEqual(a);
  else {
    expect('texts' in b && b.texts).toEqual(a.texts);
    const { bytes: _x, ...restA } = a.stats;
    const { bytes: _y, ...restB } = (b as { stats: IngestStats }).stats;
    expect(restB).toEqual(restA);
  }
  return a;
}

function errorOf(o: Outcome): string {
  expect(o).toHaveProperty('error');
  return (o as { error: string }).error;
}

function okOf(o: Outcome): { texts: string[]; stats: IngestStats } {
  if ('error' in o) expect.fail(`expected documents, got the error: ${o.error}`);
  return o as { texts: string[]; stats: IngestStats };
}

const esc = (s: string): string => s.replace(/[.*+?^${}()|[\]\\]/g, '\\$&');

/** Deterministic "binary" bytes: a PNG-like header (with NUL bytes) and noise. */
function binaryBytes(n: number): Buffer {
  const b = Buffer.alloc(n);
  Buffer.from([0x89, 0x50, 0x4e, 0x47, 0x0d, 0x0a, 0x1a, 0x0a, 0, 0, 0, 0x0d, 0x49, 0x48, 0x44, 0x52]).copy(b);
  let x = 12345;
  for (let i = 16; i < n; i++) b[i] = (x = (x * 1103515245 + 12345) >>> 0) >>> 24;
  return b;
}

const padding = (n: number): string[] => Array.from({ length: n }, (_, i) => `filler line ${i} with a few ordinary words`);

for (const format of FORMATS) {
  for (const compression of COMPRESSIONS) {
    const gz = compression === 'gzip';
    describe(`${format}, ${compression}`, () => {
      const name = `data.${EXT[format]}`;

      it('a binary file is refused naming it, or skipped whole and counted', async () => {
        const bin = write(name, binaryBytes(20000), gz);
        const good = write(name, encode(format, ['after the binary file']), gz);
        expect(errorOf(await read([bin, good], input(format)))).toMatch(new RegExp(`^${esc(bin)}: looks like a binary file \\(a NUL byte at content byte 8\\); .*input\\.onBadRecord`));
        const skipped = okOf(await read([bin, good], input(format, 'skip')));
        expect(skipped.texts).toEqual(['after the binary file']);
        expect(skipped.stats.binaryFilesSkipped).toBe(1);
        expect(skipped.stats.files).toBe(2);
      });

      it('invalid UTF-8 is replaced by U+FFFD and counted', async () => {
        const file = write(name, encode(format, ['plain words', 'caf@@ au lait'], Buffer.from([0xe9])), gz);
        const { texts, stats } = okOf(await read([file], input(format)));
        expect(texts.join('\n')).toContain('caf\uFFFD au lait');
        expect(stats.invalidUtf8Replaced).toBe(1);
      });

      it('a NUL byte past the first 8 KiB makes its line or record bad', async () => {
        const lines = [...padding(300), 'a line with a @@ inside', 'the last line'];
        const file = write(name, encode(format, lines, Buffer.from([0])), gz);
        const at = 301 + (format === 'json-array' ? 1 : 0);
        const expected: Record<Format, RegExp> = {
          'text-lines': new RegExp(`^${esc(file)}:${at}: unusable line \\(a NUL byte: binary data in a text file\\?\\); fix the line or set input\\.onBadRecord to "skip"$`),
          'text-file': new RegExp(`^${esc(file)}:${at}: unusable document \\(a NUL byte`),
          jsonl: new RegExp(`^${esc(file)}:${at}: invalid JSON record \\(`),
          'json-array': new RegExp(`^${esc(file)}:${at}: invalid JSON \\(`),
        };
        expect(errorOf(await read([file], input(format)))).toMatch(expected[format]);
        const skip = await read([file], input(format, 'skip'));
        if (format === 'json-array') {
          expect(errorOf(skip)).toMatch(expected[format]); // a syntax error leaves no next element to go on with
        } else {
          const { texts, stats } = okOf(skip);
          expect(stats.badRecordsSkipped).toBe(1);
          expect(texts.length).toBe(format === 'text-file' ? 0 : 301);
        }
      });

      it('an empty file gives no documents and no error', async () => {
        const { texts, stats } = okOf(await read([write(name, Buffer.alloc(0), gz)], input(format)));
        expect(texts).toEqual([]);
        expect(stats.files).toBe(1);
      });

      if (gz) {
        it('truncated gzip data is an error naming the file, also under "skip"', async () => {
          const whole = gzipSync(encode(format, padding(3000)));
          const dir = path.join(tmp, `f${counter++}`);
          mkdirSync(dir);
          const file = path.join(dir, `${name}.gz`);
          writeFileSync(file, whole.subarray(0, Math.floor(whole.length * 0.6)));
          for (const policy of ['fail', 'skip'] as const) {
            expect(errorOf(await read([file], input(format, policy)))).toMatch(new RegExp(`^${esc(file)}: truncated or corrupt gzip data \\(.*\\); re-create or re-download the file$`));
          }
        });
      }

      if (format === 'jsonl' || format === 'json-array') {
        it('an escaped NUL in the text, a missing text field and non-object records are bad records', async () => {
          const body = format === 'jsonl'
            ? '{"text": "ok one"}\n{"text": "nul \\u0000 here"}\n{"body": "no text"}\n[1, 2]\n"a string"\n{"text": "ok two"}\n'
            : '[{"text": "ok one"}, {"text": "nul \\u0000 here"}, {"body": "no text"}, [1, 2], "a string", {"text": "ok two"}]';
          const file = write(name, Buffer.from(body), gz);
          const where = format === 'jsonl' ? `${esc(file)}:2` : `${esc(file)}: array element 2`;
          expect(errorOf(await read([file], input(format)))).toMatch(new RegExp(`^${where}: invalid JSON record \\(text field "text" holds a NUL character \\(binary data\\?\\)\\)`));
          const { texts, stats } = okOf(await read([file], input(format, 'skip')));
          expect(texts).toEqual(['ok one', 'ok two']);
          expect(stats.badRecordsSkipped).toBe(4);
        });
      }

      if (format === 'jsonl') {
        it('a broken record fails naming file and line, or is skipped and counted', async () => {
          const file = write(name, Buffer.from('{"text": "fine"}\n{"text": "cut off\n{"text": "fine again"}\n'), gz);
          expect(errorOf(await read([file], input(format)))).toMatch(new RegExp(`^${esc(file)}:2: invalid JSON record \\(`));
          const { texts, stats } = okOf(await read([file], input(format, 'skip')));
          expect(texts).toEqual(['fine', 'fine again']);
          expect(stats.badRecordsSkipped).toBe(1);
        });
      }

      if (format !== 'json-array') {
        it('a line (text-file: a file) over the size limit is refused naming it, or skipped and counted', async () => {
          const long = 'x'.repeat(5000);
          const file = write(name, encode(format, ['short one', `${long} long`, 'short two']), gz);
          const where = format === 'text-file' ? esc(file) : `${esc(file)}:2`;
          const what = format === 'jsonl' ? 'invalid JSON record' : format === 'text-file' ? 'unusable document' : 'unusable line';
          expect(errorOf(await read([file], input(format), 1000))).toMatch(new RegExp(`^${where}: ${what} \\(longer than 1000 bytes; kindred holds one document in memory`));
          const { texts, stats } = okOf(await read([file], input(format, 'skip'), 1000));
          expect(stats.badRecordsSkipped).toBe(1);
          expect(texts).toEqual(format === 'text-file' ? [] : ['short one', 'short two']);
        });
      }
    });
  }
}

describe('a 100 MB single line', () => {
  const MB100 = 100 * 1024 * 1024;
  const unit = 'The walnut tray from Fernhill Goods arrived cracked, said Odile. ';

  /** Writes `prefix`, then unit repeated to MB100 bytes, then `suffix`, without holding it all as a string. */
  function big(name: string, prefix: string, suffix: string): string {
    const file = path.join(tmp, name);
    const fd = openSync(file, 'w');
    const block = Buffer.from(unit.repeat(Math.floor((1 << 20) / unit.length)));
    writeSync(fd, prefix);
    let n = 0;
    while (n < MB100) n += writeSync(fd, block);
    writeSync(fd, suffix);
    closeSync(fd);
    return file;
  }

  it('is read as one document by every reader (plain and gzip), in seconds, then deleted', async () => {
    const text = big('big.txt', '', '\n');
    const gz = path.join(tmp, 'big.txt.gz');
    writeFileSync(gz, gzipSync(readFileSync(text), { level: 1 }));
    const jsonl = big('big.jsonl', '{"text": "', '"}\n');
    const array = big('big.json', '[{"text": "', '"}]');
    try {
      // the build reads line formats through splits and whole-file formats through the streaming readers
      const runs = [
        [text, 'text-lines', viaReaders], [text, 'text-lines', viaSplits], [gz, 'text-lines', viaSplits],
        [jsonl, 'jsonl', viaSplits], [text, 'text-file', viaReaders], [array, 'json-array', viaReaders],
      ] as const;
      for (const [file, format, via] of runs) {
        const { texts } = okOf(await via([file], input(format)));
        expect(texts, `${format} ${file}`).toHaveLength(1);
        expect(texts[0].length).toBeGreaterThanOrEqual(MB100);
      }
    } finally {
      for (const f of [text, gz, jsonl, array]) rmSync(f, { force: true });
    }
  });
});

describe('file-system trouble', () => {
  function folder(name: string): string {
    const dir = path.join(tmp, name);
    mkdirSync(dir, { recursive: true });
    writeFileSync(path.join(dir, 'good.txt'), 'good words\n');
    return dir;
  }

  async function resolveError(paths: string[]): Promise<string> {
    return resolveInputs(paths, tmp).then(
      () => '',
      (e: unknown) => describeError(e),
    );
  }

  it('a FIFO in a folder is refused naming it (reading it would wait for a writer forever)', async () => {
    const dir = folder('with-fifo');
    const fifo = path.join(dir, 'pipe.txt');
    execFileSync('mkfifo', [fifo]);
    expect(await resolveError([dir])).toBe(`input.paths: "${fifo}" is a FIFO (named pipe), not a regular file or directory; remove it or narrow input.paths`);
    expect(await resolveError([`${dir}/*.txt`])).toMatch(/is a FIFO/);
    // a reader handed the FIFO anyway does not hang either
    expect(errorOf(await viaReaders([fifo], input('text-lines')))).toBe(`${fifo}: cannot read input file: it is a FIFO (named pipe), not a regular file; list regular files only`);
  });

  it('a dangling symbolic link in a folder is refused naming it', async () => {
    const dir = folder('with-dangling');
    symlinkSync(path.join(dir, 'gone.txt'), path.join(dir, 'link.txt'));
    expect(await resolveError([dir])).toBe(`input.paths: "${path.join(dir, 'link.txt')}" is a broken symbolic link; fix or remove it`);
  });

  it('a symbolic link loop is refused naming it; a folder loop is walked once', async () => {
    const dir = folder('with-loop');
    symlinkSync('loop.txt', path.join(dir, 'loop.txt'));
    expect(await resolveError([dir])).toMatch(new RegExp(`^input\\.paths: "${esc(path.join(dir, 'loop.txt'))}" cannot be read: too many levels of symbolic links \\(ELOOP\\)`));
    const tree = folder('with-folder-loop');
    mkdirSync(path.join(tree, 'sub'));
    writeFileSync(path.join(tree, 'sub', 'deep.txt'), 'deep words\n');
    symlinkSync('..', path.join(tree, 'sub', 'up'));
    expect((await resolveInputs([tree], tmp)).map((f) => path.relative(tree, f))).toEqual(['good.txt', 'sub/deep.txt']);
  });

  it('a file that became a folder after the inputs were listed is an error naming it', async () => {
    const dir = folder('replaced');
    const file = path.join(dir, 'good.txt');
    const files = await resolveInputs([dir], tmp);
    rmSync(file);
    mkdirSync(file);
    expect(errorOf(await viaReaders(files, input('text-lines')))).toBe(`${file}: cannot read input file: it is a directory (EISDIR); list regular files only`);
  });
});
