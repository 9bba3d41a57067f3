import { chmodSync, mkdirSync, mkdtempSync, rmSync, symlinkSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import path from 'node:path';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { KindredError } from '../src/errors.js';
import { resolveInputs } from '../src/ingest/index.js';

const root = mkdtempSync(path.join(tmpdir(), 'kindred-resolve-'));
const base = path.join(root, 'project');

/** Layout:
 *  project/corpus/a.txt, b.jsonl, .hidden.txt, .git/config, 2024/c.txt, 2024/d.json.gz, 2024/deep/e.txt
 *  project/notes.md, project/x1.txt, project/x22.txt
 */
beforeAll(() => {
  const files = [
    'corpus/a.txt', 'corpus/b.jsonl', 'corpus/.hidden.txt', 'corpus/.git/config', 'corpus/2024/c.txt',
    'corpus/2024/d.json.gz', 'corpus/2024/deep/e.txt', 'notes.md', 'x1.txt', 'x22.txt', 'empty-dir/.keep',
  ];
  for (const f of files) {
    mkdirSync(path.dirname(path.join(base, f)), { recursive: true });
    writeFileSync(path.join(base, f), 'text\n');
  }
});
afterAll(() => rmSync(root, { recursive: true, force: true }));

const rel = (files: string[]): string[] => files.map((f) => path.relative(base, f));

async function resolveError(paths: string[]): Promise<Error> {
  const err = await resolveInputs(paths, base).then(
    () => null,
    (e: unknown) => e,
  );
  expect(err).toBeInstanceOf(KindredError);
  expect((err as Error).message).not.toContain('\n');
  return err as Error;
}

describe('resolveInputs', () => {
  it('a plain file gives its absolute path', async () => {
    expect(await resolveInputs(['notes.md'], base)).toEqual([path.join(base, 'notes.md')]);
  });

  it('a directory is walked recursively, hidden files and folders skipped, sorted', async () => {
    expect(rel(await resolveInputs(['corpus'], base))).toEqual([
      'corpus/2024/c.txt', 'corpus/2024/d.json.gz', 'corpus/2024/deep/e.txt', 'corpus/a.txt', 'corpus/b.jsonl',
    ]);
  });

  it('* matches within one folder level', async () => {
    expect(rel(await resolveInputs(['corpus/*.txt'], base))).toEqual(['corpus/a.txt']);
  });

  it('? matches exactly one character', async () => {
    expect(rel(await resolveInputs(['x?.txt'], base))).toEqual(['x1.txt']);
    expect(rel(await resolveInputs(['x??.txt'], base))).toEqual(['x22.txt']);
  });

  it('** matches any number of folders, including none', async () => {
    expect(rel(await resolveInputs(['corpus/**/*.txt'], base))).toEqual(['corpus/2024/c.txt', 'corpus/2024/deep/e.txt', 'corpus/a.txt']);
    expect(rel(await resolveInputs(['**/e.txt'], base))).toEqual(['corpus/2024/deep/e.txt']);
    expect(rel(await resolveInputs(['corpus/**'], base))).toEqual(rel(await resolveInputs(['corpus'], base)));
  });

  it('wildcards do not match hidden names unless the pattern segment starts with a dot', async () => {
    expect(rel(await resolveInputs(['corpus/*'], base))).not.toContain('corpus/.hidden.txt');
    expect(rel(await resolveInputs(['corpus/.h*'], base))).toEqual(['corpus/.hidden.txt']);
  });

  it('a wildcard in a folder segment, and a matched folder, are expanded', async () => {
    expect(rel(await resolveInputs(['corp*/20??/*.gz'], base))).toEqual(['corpus/2024/d.json.gz']);
    expect(rel(await resolveInputs(['corpus/20*'], base))).toEqual(['corpus/2024/c.txt', 'corpus/2024/d.json.gz', 'corpus/2024/deep/e.txt']);
  });

  it('absolute paths and patterns work; overlapping entries are deduplicated and the result sorted', async () => {
    const got = await resolveInputs([path.join(base, 'corpus/a.txt'), 'x*.txt', 'corpus/*.txt', `${base}/x1.txt`], base);
    expect(rel(got)).toEqual(['corpus/a.txt', 'x1.txt', 'x22.txt']);
    expect(got.every((f) => path.isAbsolute(f))).toBe(true);
  });

  it('a symbolic link to a folder is followed once (no loop)', async () => {
    const linked = path.join(root, 'linked');
    mkdirSync(path.join(linked, 'sub'), { recursive: true });
    writeFileSync(path.join(linked, 'sub', 'f.txt'), 'x\n');
    symlinkSync(linked, path.join(linked, 'sub', 'loop'));
    expect((await resolveInputs([linked], base)).map((f) => path.relative(linked, f))).toEqual(['sub/f.txt']);
    expect((await resolveInputs([`${linked}/**/*.txt`], base)).map((f) => path.relative(linked, f))).toEqual(['sub/f.txt']);
  });

  it.each([['missing.txt'], ['corpus/*.csv'], ['nowhere/**/*.txt'], ['empty-dir']])(
    '"%s" matching nothing is an error naming the entry',
    async (p) => {
      const err = await resolveError([p]);
      expect(err.message).toContain(`input path "${p}" matches no file`);
      expect(err.message).toContain('input.paths');
    },
  );

  it('a broken symbolic link inside a walked folder is an error naming it', async () => {
    const dir = path.join(root, 'broken-link');
    mkdirSync(dir);
    writeFileSync(path.join(dir, 'ok.txt'), 'x\n');
    symlinkSync(path.join(dir, 'gone.txt'), path.join(dir, 'link.txt'));
    const err = await resolveError([dir]);
    expect(err.message).toContain(path.join(dir, 'link.txt'));
  });

  it.skipIf(process.getuid?.() === 0)('an unreadable folder is an error naming it', async () => {
    const dir = path.join(root, 'locked');
    mkdirSync(dir);
    writeFileSync(path.join(dir, 'f.txt'), 'x\n');
    chmodSync(dir, 0o000);
    try {
      const err = await resolveError([dir]);
      expect(err.message).toContain(dir);
    } finally {
      chmodSync(dir, 0o755);
    }
  });
});
