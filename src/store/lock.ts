/**
 * The build lock: one build at a time per output path. The lock is a file created with O_EXCL holding the
 * owner's pid, host name and start time; a lock whose process is gone (same host, pid not alive) is taken
 * over, with a note.
 */
import { promises as fsp, readFileSync } from 'node:fs';
import os from 'node:os';
import path from 'node:path';
import { KindredError } from '../errors.js';
import { TOOL_VERSION } from '../version.js';
import { temporarySibling, wrapWriteError } from './atomic.js';

/** Who holds a lock. */
export interface LockOwner {
  pid: number;
  hostname: string;
  startedAt: string;
  outDir: string;
  toolVersion: string;
}

export interface BuildLock {
  readonly file: string;
  readonly owner: LockOwner;
  /** Removes the lock file if it is still this process's. */
  release(): Promise<void>;
}

/**
 * A lock file with no readable owner younger than this is being written by its creator (the owner is
 * written right after the exclusive create); older, its creator died in between and it is stale.
 */
const UNREADABLE_LOCK_GRACE_MS = 10_000;
const ATTEMPTS = 20;

function sleep(ms: number): Promise<void> {
  return new Promise((resolve) => setTimeout(resolve, ms));
}

function isCode(e: unknown, code: string): boolean {
  return (e as NodeJS.ErrnoException | null)?.code === code;
}

/** True when a process with this pid exists on this host and is not a zombie. */
export function processAlive(pid: number): boolean {
  if (!Number.isInteger(pid) || pid <= 0) return false;
  try {
    process.kill(pid, 0);
  } catch (e) {
    // EPERM: it exists but belongs to another user
    return isCode(e, 'EPERM');
  }
  try {
    // Linux: a zombie (Z) or dead (X) process has exited and only waits to be reaped
    const stat = readFileSync(`/proc/${pid}/stat`, 'utf8');
    const state = stat.slice(stat.lastIndexOf(')') + 2, stat.lastIndexOf(')') + 3);
    if (state === 'Z' || state === 'X') return false;
  } catch {
    // no /proc: trust kill(pid, 0)
  }
  return true;
}

type LockState = { kind: 'gone' } | { kind: 'owner'; owner: LockOwner; text: string } | { kind: 'unreadable'; text: string; ageMs: number };

async function readLock(file: string): Promise<LockState> {
  let text: string;
  let ageMs: number;
  try {
    text = await fsp.readFile(file, 'utf8');
    ageMs = Date.now() - (await fsp.stat(file)).mtimeMs;
  } catch (e) {
    if (isCode(e, 'ENOENT')) return { kind: 'gone' };
    throw new KindredError(`cannot read the lock file ${file}: ${(e as NodeJS.ErrnoException).code ?? String(e)}`);
  }
  try {
    const owner = JSON.parse(text) as LockOwner;
    if (typeof owner.pid === 'number' && typeof owner.hostname === 'string') return { kind: 'owner', owner, text };
  } catch {
    // fall through
  }
  return { kind: 'unreadable', text, ageMs };
}

/**
 * Creates the lock `file` holding `text` (its owner), or returns false when it exists. The content is written whole to a
 * temporary sibling and synced, then linked into place: link fails when the lock exists, and the lock never
 * exists without its content, so a build killed while taking it leaves no empty lock that the next build would
 * have to wait out (UNREADABLE_LOCK_GRACE_MS).
 */
async function createLock(file: string, text: string): Promise<boolean> {
  const tmp = temporarySibling(file, 'lock');
  try {
    let handle: fsp.FileHandle;
    try {
      handle = await fsp.open(tmp, 'wx');
    } catch (e) {
      if (isCode(e, 'ENOENT')) return makeArea(file);
      throw wrapWriteError(e, file);
    }
    try {
      await handle.writeFile(text);
      await handle.sync();
    } catch (e) {
      throw wrapWriteError(e, file, true);
    } finally {
      await handle.close();
    }
    try {
      await fsp.link(tmp, file);
    } catch (e) {
      if (isCode(e, 'EEXIST')) return false;
      if (isCode(e, 'ENOENT')) return makeArea(file);
      // a file system without hard links (vfat, exFAT, some FUSE and SMB mounts): created exclusive, then written
      if (NO_LINKS.some((code) => isCode(e, code))) return createLockInPlace(file, text);
      throw wrapWriteError(e, file);
    }
    return true;
  } finally {
    await fsp.rm(tmp, { force: true }).catch(() => undefined);
  }
}

/** What link fails with where a file system has no hard links. */
const NO_LINKS = ['EPERM', 'ENOTSUP', 'EOPNOTSUPP', 'ENOSYS'];

/** createLock without a hard link: the lock created with O_EXCL, then written (empty in between). */
async function createLockInPlace(file: string, text: string): Promise<boolean> {
  let handle: fsp.FileHandle;
  try {
    handle = await fsp.open(file, 'wx');
  } catch (e) {
    if (isCode(e, 'EEXIST')) return false;
    throw wrapWriteError(e, file);
  }
  try {
    await handle.writeFile(text);
    await handle.sync();
  } catch (e) {
    await handle.close().catch(() => undefined);
    await fsp.rm(file, { force: true }).catch(() => undefined);
    throw wrapWriteError(e, file);
  }
  await handle.close();
  return true;
}

/** The work area was removed by a build that just finished: makes it again; the caller retries (false). */
async function makeArea(file: string): Promise<false> {
  await fsp.mkdir(path.dirname(file), { recursive: true }).catch((m: unknown) => {
    throw wrapWriteError(m, path.dirname(file));
  });
  return false;
}

/**
 * Removes a stale lock whose content is still `staleText`. A second exclusive file serializes takers, so two
 * builds that both find the same stale lock cannot remove each other's fresh one.
 */
async function removeStaleLock(file: string, staleText: string): Promise<void> {
  const guard = `${file}.takeover`;
  let handle: fsp.FileHandle;
  try {
    handle = await fsp.open(guard, 'wx');
  } catch (e) {
    if (!isCode(e, 'EEXIST')) throw wrapWriteError(e, guard);
    // another taker is at work (give it time); a guard left by a taker that died is removed after the grace time
    const st = await fsp.stat(guard).catch(() => null);
    if (st && Date.now() - st.mtimeMs > UNREADABLE_LOCK_GRACE_MS) await fsp.rm(guard, { force: true });
    else await sleep(100);
    return;
  }
  try {
    await handle.close();
    const now = await fsp.readFile(file, 'utf8').catch(() => null);
    if (now === staleText) await fsp.rm(file, { force: true });
  } finally {
    await fsp.rm(guard, { force: true });
  }
}

function busy(outDir: string, file: string, owner: LockOwner, why: string): KindredError {
  return new KindredError(
    `${outDir} is being built by another kindred process (pid ${owner.pid} on ${owner.hostname}, started ${owner.startedAt})${why}; ` +
      `wait for it to finish, or if no such build runs any more, delete ${file}`,
  );
}

/**
 * Takes the build lock `file` for `outDir`, or throws a one-line KindredError naming the running build.
 * `notify` hears a one-line note when a lock left by a dead process is taken over.
 */
export async function acquireBuildLock(file: string, outDir: string, notify: (message: string) => void): Promise<BuildLock> {
  const owner: LockOwner = {
    pid: process.pid,
    hostname: os.hostname(),
    startedAt: new Date().toISOString(),
    outDir,
    toolVersion: TOOL_VERSION,
  };
  // a lock in passing states (being taken over, or written by a build that died) is retried until the grace
  // time of an unreadable lock or of a takeover guard has passed; each takeover is told once
  const deadline = Date.now() + UNREADABLE_LOCK_GRACE_MS + 5000;
  const told = new Set<string>();
  const tell = (text: string, message: string): void => {
    if (told.has(text)) return;
    told.add(text);
    notify(message);
  };
  const text = JSON.stringify(owner, null, 2) + '\n';
  for (let attempt = 0; attempt < ATTEMPTS || Date.now() < deadline; attempt++) {
    if (await createLock(file, text)) {
      return {
        file,
        owner,
        release: async () => {
          const now = await fsp.readFile(file, 'utf8').catch(() => null);
          if (now === text) await fsp.rm(file, { force: true });
        },
      };
    }
    const state = await readLock(file);
    if (state.kind === 'gone') continue;
    if (state.kind === 'unreadable') {
      if (state.ageMs < UNREADABLE_LOCK_GRACE_MS) {
        await sleep(100);
        continue;
      }
      tell(state.text, `taking over the lock ${file}: it names no owner and is ${Math.round(state.ageMs / 1000)} s old (its build died while creating it)`);
      await removeStaleLock(file, state.text);
      continue;
    }
    const other = state.owner;
    if (other.hostname !== owner.hostname) {
      throw busy(outDir, file, other, ' (another host: kindred cannot check whether it still runs)');
    }
    if (processAlive(other.pid)) throw busy(outDir, file, other, '');
    tell(state.text, `taking over the lock of ${outDir} left by pid ${other.pid} (started ${other.startedAt}), which is no longer running`);
    await removeStaleLock(file, state.text);
  }
  throw new KindredError(`cannot take the lock ${file}: it keeps changing or cannot be read; try again in a few seconds`);
}
