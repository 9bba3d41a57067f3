import { promises as fsp, writeSync } from 'node:fs';
import path from 'node:path';
import { KindredError } from '../errors.js';

let temporaryCounter = 0;

/** A temporary sibling path for `target`: same folder, so the final rename never crosses file systems. */
export function temporarySibling(target: string, tag = 'tmp'): string {
  const dir = path.dirname(target);
  const base = path.basename(target);
  const unique = `${process.pid}-${Date.now().toString(36)}-${(temporaryCounter++).toString(36)}`;
  return path.join(dir, `.kindred-${tag}-${base}-${unique}`);
}

/**
 * Writes a file atomically: to a temporary sibling first, flushed to disk, then renamed into place. A failed
 * write removes the temporary file and throws a one-line KindredError naming the path.
 */
export async function writeFileAtomic(target: string, data: string | Uint8Array): Promise<void> {
  const tmp = temporarySibling(target);
  try {
    await fsp.writeFile(tmp, data);
    await syncFile(tmp);
    await fsp.rename(tmp, target);
  } catch (e) {
    await fsp.rm(tmp, { force: true }).catch(() => undefined);
    // name the file being written, not its temporary sibling
    throw wrapWriteError(e, target, true);
  }
}

/** Flushes a written file's data to the disk. */
export async function syncFile(file: string): Promise<void> {
  const handle = await fsp.open(file, 'r+');
  try {
    await handle.sync();
  } finally {
    await handle.close();
  }
}

/** Flushes a folder's entries (a rename or a new file in it) to the disk; file systems that cannot do it are ignored. */
export async function syncDirectory(dir: string): Promise<void> {
  let handle: fsp.FileHandle;
  try {
    handle = await fsp.open(dir, 'r');
  } catch {
    return;
  }
  try {
    await handle.sync();
  } catch {
    // EINVAL/EISDIR on file systems without directory sync: nothing more to do
  } finally {
    await handle.close();
  }
}

const WRITE_FAILURES: Record<string, string> = {
  ENOSPC: 'the disk is full (ENOSPC)',
  EDQUOT: 'the disk quota is used up (EDQUOT)',
  EFBIG: 'the file is too large for the file system (EFBIG)',
  EROFS: 'the file system is read-only (EROFS)',
  EACCES: 'permission denied (EACCES)',
  EPERM: 'operation not permitted (EPERM)',
  EIO: 'input/output error (EIO)',
  EMFILE: 'too many open files (EMFILE)',
  ENFILE: 'too many open files in the system (ENFILE)',
  ENOENT: 'a folder on the path has disappeared (ENOENT)',
  EEXIST: 'it already exists (EEXIST)',
  ENOTDIR: 'a parent of it is not a folder (ENOTDIR)',
  EISDIR: 'it is a folder (EISDIR)',
};

/** A short description of a file-system error code, e.g. "the disk is full (ENOSPC)". */
export function describeWriteFailure(code: string): string {
  return WRITE_FAILURES[code] ?? code;
}

/** Turns a file-system error on a write into a one-line KindredError naming the path; anything else is returned as is. */
export function wrapWriteError(e: unknown, target: string, preferTarget = false): unknown {
  if (e instanceof KindredError) return e;
  const err = e as NodeJS.ErrnoException;
  if (err && typeof err.code === 'string') {
    const where = typeof err.path === 'string' && !preferTarget ? err.path : target;
    const hint = err.code === 'ENOSPC' || err.code === 'EDQUOT' ? '; free some space and run the build again' : '';
    return new KindredError(`cannot write ${where}: ${describeWriteFailure(err.code)}${hint}`);
  }
  return e;
}

/** Writes bytes[0, length) at the file position of fd; a failure becomes a one-line error naming file. */
export function writeBytesOrThrow(fd: number, bytes: Uint8Array, length: number, file: string): void {
  try {
    writeSync(fd, bytes, 0, length);
  } catch (e) {
    throw wrapWriteError(e, file);
  }
}
