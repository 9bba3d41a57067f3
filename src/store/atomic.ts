import { promises as fsp } from 'node:fs';
import path from 'node:path';
import { KindredError } from '../errors.js';

/** A temporary sibling path for `target`: same folder, so the final rename never crosses file systems. */
export function temporarySibling(target: string, tag = 'tmp'): string {
  const dir = path.dirname(target);
  const base = path.basename(target);
  return path.join(dir, `.kindred-${tag}-${base}-${process.pid}-${Date.now().toString(36)}`);
}

/** Writes a file atomically: to a temporary sibling first, then renamed into place. */
export async function writeFileAtomic(target: string, data: string | Uint8Array): Promise<void> {
  const tmp = temporarySibling(target);
  try {
    await fsp.writeFile(tmp, data);
    await fsp.rename(tmp, target);
  } catch (e) {
    await fsp.rm(tmp, { force: true });
    throw wrapWriteError(e, target);
  }
}

/** Turns a file-system error on a write into a one-line KindredError naming the path. */
export function wrapWriteError(e: unknown, target: string): unknown {
  if (e instanceof KindredError) return e;
  const err = e as NodeJS.ErrnoException;
  if (err && typeof err.code === 'string') {
    const why = err.code === 'ENOSPC' ? 'the disk is full' : err.code === 'EACCES' || err.code === 'EPERM' ? 'permission denied' : err.code;
    return new KindredError(`cannot write ${err.path ?? target}: ${why}`);
  }
  return e;
}

/**
 * Publishes a finished temporary directory at `target`. An existing build at `target` is moved aside
 * and removed only after the new one is in place, so readers see either the old or the new build.
 */
export async function publishDirectory(tmpDir: string, target: string): Promise<void> {
  let old: string | null = null;
  try {
    await fsp.access(target);
    old = temporarySibling(target, 'old');
    await fsp.rename(target, old);
  } catch (e) {
    if ((e as NodeJS.ErrnoException).code !== 'ENOENT') throw wrapWriteError(e, target);
  }
  try {
    await fsp.rename(tmpDir, target);
  } catch (e) {
    if (old) await fsp.rename(old, target).catch(() => undefined);
    throw wrapWriteError(e, target);
  }
  if (old) await fsp.rm(old, { recursive: true, force: true });
}
