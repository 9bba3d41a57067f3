/**
 * Checks of the demo-corpus generator (scripts/make-demo-corpus.mjs): determinism, size, record
 * shape, skip/regenerate behaviour. This checks the generator, not a numeric stage, so there is no
 * outside reference value here; the gzip header layout is from RFC 1952, section 2.3.
 */
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { spawnSync } from 'node:child_process';
import { mkdtempSync, readdirSync, readFileSync, rmSync, statSync } from 'node:fs';
import { tmpdir } from 'node:os';
import path from 'node:path';
import { gunzipSync } from 'node:zlib';
import { repoRoot } from './helpers/python.js';

const script = path.join(repoRoot, 'scripts', 'make-demo-corpus.mjs');

interface RunResult {
  status: number | null;
  stdout: string;
  stderr: string;
}

function runGenerator(args: string[]): RunResult {
  const r = spawnSync(process.execPath, [script, ...args], { cwd: repoRoot, encoding: 'utf8' });
  return { status: r.status, stdout: r.stdout, stderr: r.stderr };
}

function mustRun(args: string[]): string {
  const r = runGenerator(args);
  if (r.status !== 0) throw new Error(`generator failed (${r.status}): ${r.stderr}`);
  return r.stdout;
}

function dataFiles(dir: string): string[] {
  return readdirSync(dir).filter((f) => f.endsWith('.jsonl.gz')).sort();
}

function tokenCount(text: string): number {
  return text.split(/\s+/).filter((t) => t.length > 0).length;
}

interface DemoRecord {
  id: string;
  kind: string;
  product: { sku: string; line: string; name: string };
  body: { text: string };
  rating?: number;
}

function readRecords(dir: string, file: string): DemoRecord[] {
  const text = gunzipSync(readFileSync(path.join(dir, file))).toString('utf8');
  expect(text.endsWith('\n')).toBe(true);
  return text.slice(0, -1).split('\n').map((line, i) => {
    try {
      return JSON.parse(line) as DemoRecord;
    } catch (e) {
      throw new Error(`${file} line ${i + 1} does not parse: ${(e as Error).message}`);
    }
  });
}

let work: string;
beforeAll(() => {
  work = mkdtempSync(path.join(tmpdir(), 'kindred-demo-'));
});
afterAll(() => {
  rmSync(work, { recursive: true, force: true });
});

describe('demo corpus generator: determinism', () => {
  it('the same seed gives byte-identical files, another seed different ones', () => {
    const a = path.join(work, 'a');
    const b = path.join(work, 'b');
    const c = path.join(work, 'c');
    mustRun(['--out', a, '--seed', '7', '--docs', '400']);
    mustRun(['--out', b, '--seed', '7', '--docs', '400']);
    mustRun(['--out', c, '--seed', '8', '--docs', '400']);
    const files = dataFiles(a);
    expect(files.length).toBeGreaterThanOrEqual(3);
    expect(dataFiles(b)).toEqual(files);
    expect(dataFiles(c)).toEqual(files);
    for (const f of [...files, '.generated.json']) {
      expect(readFileSync(path.join(b, f)).equals(readFileSync(path.join(a, f))), f).toBe(true);
    }
    for (const f of files) {
      const textA = gunzipSync(readFileSync(path.join(a, f)));
      const textC = gunzipSync(readFileSync(path.join(c, f)));
      expect(textC.equals(textA), f).toBe(false);
    }
  });

  it('writes gzip headers without a timestamp and with OS "unknown" (RFC 1952, section 2.3)', () => {
    const dir = path.join(work, 'header');
    mustRun(['--out', dir, '--docs', '50']);
    for (const f of dataFiles(dir)) {
      const gz = readFileSync(path.join(dir, f));
      expect([gz[0], gz[1], gz[2]]).toEqual([0x1f, 0x8b, 8]);
      expect(gz[3]).toBe(0); // FLG: no file name, no comment, no extra field
      expect(gz.readUInt32LE(4)).toBe(0); // MTIME
      expect(gz[9]).toBe(255); // OS
    }
  });
});

describe('demo corpus generator: default size', () => {
  const dir = () => path.join(work, 'default');
  let stdout = '';
  beforeAll(() => {
    stdout = mustRun(['--out', dir()]);
  });

  it('prints a one-line summary with files, documents and tokens', () => {
    expect(stdout.trim().split('\n')).toHaveLength(1);
    expect(stdout).toMatch(/^demo corpus written: .* \(\d+ files, 10000 documents, \d+ tokens, seed 42\)\n$/);
  });

  it('holds 10,000 parseable records over several files, at least 1,000,000 whitespace tokens', () => {
    const files = dataFiles(dir());
    expect(files.length).toBeGreaterThanOrEqual(4);
    const ids = new Set<string>();
    const kinds = new Map<string, number>();
    const lines = new Set<string>();
    let tokens = 0;
    let docs = 0;
    for (const f of files) {
      for (const r of readRecords(dir(), f)) {
        docs++;
        ids.add(r.id);
        kinds.set(r.kind, (kinds.get(r.kind) ?? 0) + 1);
        expect(typeof r.body?.text, r.id).toBe('string');
        expect(typeof r.product?.sku, r.id).toBe('string');
        expect(typeof r.product?.line, r.id).toBe('string');
        const n = tokenCount(r.body.text);
        expect(n, r.id).toBeGreaterThanOrEqual(30);
        expect(n, r.id).toBeLessThanOrEqual(300);
        tokens += n;
        if (r.kind === 'review') expect([1, 2, 3, 4, 5]).toContain(r.rating);
        lines.add(r.product.line);
      }
    }
    expect(docs).toBe(10000);
    expect(ids.size).toBe(10000);
    expect([...kinds.keys()].sort()).toEqual(['catalogue', 'review', 'ticket']);
    expect(lines.size).toBe(8);
    expect(tokens).toBeGreaterThanOrEqual(1_000_000);
    const stamp = JSON.parse(readFileSync(path.join(dir(), '.generated.json'), 'utf8')) as {
      seed: number; docs: number; tokens: number; files: { name: string }[];
    };
    expect(stamp.seed).toBe(42);
    expect(stamp.docs).toBe(10000);
    expect(stamp.tokens).toBe(tokens);
    expect(stamp.files.map((f) => f.name).sort()).toEqual(files);
  });

  it('skips when the folder holds the same seed and count', () => {
    const before = statSync(path.join(dir(), 'reviews-000.jsonl.gz')).mtimeMs;
    expect(mustRun(['--out', dir()])).toMatch(/^demo corpus present: .*10000 documents/);
    expect(statSync(path.join(dir(), 'reviews-000.jsonl.gz')).mtimeMs).toBe(before);
  });
});

describe('demo corpus generator: stamp and arguments', () => {
  it('regenerates when the count differs and removes files the old stamp listed', () => {
    const dir = path.join(work, 'shrink');
    mustRun(['--out', dir, '--docs', '3400']);
    const big = dataFiles(dir);
    expect(mustRun(['--out', dir, '--docs', '300'])).toMatch(/^demo corpus written: .*300 documents/);
    const small = dataFiles(dir);
    expect(small.length).toBeLessThan(big.length);
    const docs = small.reduce((n, f) => n + readRecords(dir, f).length, 0);
    expect(docs).toBe(300);
  });

  it('regenerates when a listed file is missing, and always with --force', () => {
    const dir = path.join(work, 'a');
    expect(mustRun(['--out', dir, '--seed', '7', '--docs', '400'])).toMatch(/^demo corpus present: /);
    rmSync(path.join(dir, 'tickets-000.jsonl.gz'));
    expect(mustRun(['--out', dir, '--seed', '7', '--docs', '400'])).toMatch(/^demo corpus written: /);
    expect(dataFiles(dir)).toContain('tickets-000.jsonl.gz');
    expect(mustRun(['--out', dir, '--seed', '7', '--docs', '400', '--force'])).toMatch(/^demo corpus written: /);
  });

  it('rejects a bad option value with a message naming the option', () => {
    const r = runGenerator(['--out', path.join(work, 'bad'), '--docs', 'many']);
    expect(r.status).toBe(2);
    expect(r.stderr).toContain('--docs');
  });
});
