import { KindredError } from '../errors.js';

/** An error raised by a file-system call (it carries an errno code such as ENOENT). */
export function isFsError(e: unknown): e is NodeJS.ErrnoException {
  return typeof e === 'object' && e !== null && typeof (e as NodeJS.ErrnoException).code === 'string' && 'syscall' in e;
}

const DESCRIPTIONS: Record<string, string> = {
  ENOENT: 'no such file or directory',
  ENOTDIR: 'a parent of it is not a directory',
  EACCES: 'permission denied',
  EPERM: 'operation not permitted',
  EISDIR: 'it is a directory',
  ELOOP: 'too many levels of symbolic links',
  EMFILE: 'too many open files',
  ENFILE: 'too many open files in the system',
  EIO: 'input/output error',
};

/** A short human description of a file-system error code, e.g. "permission denied (EACCES)". */
export function describeFsError(e: NodeJS.ErrnoException): string {
  const code = e.code ?? 'unknown error';
  const text = DESCRIPTIONS[code];
  return text ? `${text} (${code})` : code;
}

/** Turns a file-system error into a one-line KindredError naming the path; anything else is rethrown as is (a bug). */
export function fsErrorFor(file: string, e: unknown, what = 'cannot read input file'): unknown {
  if (!isFsError(e)) return e;
  return new KindredError(`${file}: ${what}: ${describeFsError(e)}; check that the path exists and is readable`);
}
