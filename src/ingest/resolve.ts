/**
 * Expansion of input.paths into a sorted list of absolute file paths: plain files, directories
 * (walked recursively) and glob patterns with `*`, `?` and `**`. Hidden entries (names starting
 * with ".") are skipped in walks and by wildcards, unless a pattern segment itself starts with ".".
 */
import { access, readdir, realpath, stat } from 'node:fs/promises';
import { constants, type Dirent, type Stats } from 'node:fs';
import path from 'node:path';
import { KindredError } from '../errors.js';
import { describeFsError, isFsError } from './fs-errors.js';

const GLOB_CHARS = /[*?]/;

function unreadable(p: string, e: unknown): unknown {
  if (!isFsError(e)) return e;
  return new KindredError(`input.paths: "${p}" cannot be read: ${describeFsError(e)}; fix its permissions or remove it from input.paths`);
}

/** stat that maps "does not exist" to null and other failures to a KindredError. */
async function statOrNull(p: string): Promise<Stats | null> {
  try {
    return await stat(p);
  } catch (e) {
    if (isFsError(e) && (e.code === 'ENOENT' || e.code === 'ENOTDIR')) return null;
    throw unreadable(p, e);
  }
}

async function realpathOrNull(p: string): Promise<string | null> {
  try {
    return await realpath(p);
  } catch (e) {
    if (isFsError(e) && (e.code === 'ENOENT' || e.code === 'ENOTDIR')) return null;
    throw unreadable(p, e);
  }
}

async function listDir(dir: string): Promise<Dirent[]> {
  try {
    return await readdir(dir, { withFileTypes: true });
  } catch (e) {
    if (isFsError(e) && (e.code === 'ENOENT' || e.code === 'ENOTDIR')) return [];
    throw unreadable(dir, e);
  }
}

type Kind = 'file' | 'dir' | 'other';

/** What a special file is, for messages. */
function specialKind(st: Dirent | Stats): string {
  if (st.isFIFO()) return 'a FIFO (named pipe)';
  if (st.isSocket()) return 'a socket';
  if (st.isCharacterDevice() || st.isBlockDevice()) return 'a device';
  return 'not a regular file';
}

/**
 * The kind of a directory entry, following symbolic links. A FIFO, socket or device is an error: reading a
 * FIFO would wait for a writer forever, and silently leaving a file out would change the corpus unseen.
 */
async function kindOf(dir: string, entry: Dirent): Promise<Kind> {
  if (entry.isFile()) return 'file';
  if (entry.isDirectory()) return 'dir';
  if (!entry.isSymbolicLink()) return 'other';
  const full = path.join(dir, entry.name);
  const target = await statOrNull(full);
  if (target === null) {
    throw new KindredError(`input.paths: "${full}" is a broken symbolic link; fix or remove it`);
  }
  return target.isFile() ? 'file' : target.isDirectory() ? 'dir' : 'other';
}

/** The error for a special file that a walk or a pattern selected. */
async function refuseOther(full: string): Promise<KindredError> {
  const st = await stat(full).catch(() => null);
  return notRegular(full, st === null ? 'not a regular file' : specialKind(st));
}

function notRegular(full: string, what: string): KindredError {
  return new KindredError(`input.paths: "${full}" is ${what}, not a regular file or directory; remove it or narrow input.paths`);
}

/** Walks a directory recursively, collecting regular files; symlinked directories are followed once. */
async function walk(dir: string, out: string[], visited: Set<string>): Promise<void> {
  const real = await realpathOrNull(dir);
  if (real === null || visited.has(real)) return;
  visited.add(real);
  for (const entry of await listDir(dir)) {
    if (entry.name.startsWith('.')) continue;
    const full = path.join(dir, entry.name);
    const kind = await kindOf(dir, entry);
    if (kind === 'file') out.push(full);
    else if (kind === 'dir') await walk(full, out, visited);
    else throw await refuseOther(full);
  }
}

function escapeRegExp(s: string): string {
  return s.replace(/[.+^${}()|[\]\\*?]/g, '\\$&');
}

/** A regular expression for one path segment: `*` is any run of characters, `?` one character. */
export function segmentRegExp(segment: string): RegExp {
  let source = '';
  for (const ch of segment) {
    if (ch === '*') source += '.*';
    else if (ch === '?') source += '.';
    else source += escapeRegExp(ch);
  }
  return new RegExp(`^${source}$`, 'su');
}

/**
 * Matches the pattern segments from index i below `dir`, collecting files into out.
 * `seen` holds "segment index:real path" pairs already expanded, so a symbolic-link loop under `**` ends.
 */
async function expandSegments(dir: string, segments: string[], i: number, out: string[], seen: Set<string>): Promise<void> {
  const segment = segments[i];
  const last = i === segments.length - 1;
  if (segment === '**') {
    if (last) {
      await walk(dir, out, new Set());
      return;
    }
    const real = await realpathOrNull(dir);
    if (real === null || seen.has(`${i}:${real}`)) return;
    seen.add(`${i}:${real}`);
    await expandSegments(dir, segments, i + 1, out, seen); // zero directories
    for (const entry of await listDir(dir)) {
      if (entry.name.startsWith('.')) continue;
      if ((await kindOf(dir, entry)) === 'dir') await expandSegments(path.join(dir, entry.name), segments, i, out, seen);
    }
    return;
  }
  if (!GLOB_CHARS.test(segment)) {
    const full = path.join(dir, segment);
    const st = await statOrNull(full);
    if (st === null) return;
    if (last) {
      if (st.isFile()) out.push(full);
      else if (st.isDirectory()) await walk(full, out, new Set());
      else throw notRegular(full, specialKind(st));
    } else if (st.isDirectory()) {
      await expandSegments(full, segments, i + 1, out, seen);
    }
    return;
  }
  const re = segmentRegExp(segment);
  const allowHidden = segment.startsWith('.');
  for (const entry of await listDir(dir)) {
    if (entry.name.startsWith('.') && !allowHidden) continue;
    if (!re.test(entry.name)) continue;
    const full = path.join(dir, entry.name);
    const kind = await kindOf(dir, entry);
    if (last) {
      if (kind === 'file') out.push(full);
      else if (kind === 'dir') await walk(full, out, new Set());
      else throw await refuseOther(full);
    } else if (kind === 'dir') {
      await expandSegments(full, segments, i + 1, out, seen);
    }
  }
}

/** The files matched by one glob pattern (relative to baseDir unless absolute). */
async function expandGlob(pattern: string, baseDir: string): Promise<string[]> {
  const segments = pattern.split('/').filter((s) => s !== '');
  // Leading segments without wildcards name the directory to start from.
  let start = path.isAbsolute(pattern) ? path.parse(path.resolve(pattern)).root : path.resolve(baseDir);
  let k = 0;
  while (k < segments.length - 1 && !GLOB_CHARS.test(segments[k])) start = path.resolve(start, segments[k++]);
  // Consecutive '**' segments match the same as one.
  const rest = segments.slice(k).filter((s, j, a) => !(s === '**' && a[j - 1] === '**'));
  const out: string[] = [];
  await expandSegments(start, rest, 0, out, new Set());
  return out;
}

/** The files named by one plain path: the file itself, or every file below a directory. */
async function expandPath(p: string, baseDir: string): Promise<string[]> {
  const full = path.resolve(baseDir, p);
  const st = await statOrNull(full);
  if (st === null) return [];
  if (st.isFile()) return [full];
  if (st.isDirectory()) {
    const out: string[] = [];
    await walk(full, out, new Set());
    return out;
  }
  throw new KindredError(`input.paths: "${full}" is not a regular file or directory; list files or directories only`);
}

/**
 * Resolves input paths (files, directories, glob patterns) against baseDir into absolute file paths,
 * sorted by code unit and deduplicated, so the document order is stable.
 */
export async function resolveInputs(paths: string[], baseDir: string): Promise<string[]> {
  const found = new Set<string>();
  for (const p of paths) {
    const matches = GLOB_CHARS.test(p) ? await expandGlob(p, baseDir) : await expandPath(p, baseDir);
    if (matches.length === 0) {
      throw new KindredError(
        `input path "${p}" matches no file (resolved against ${path.resolve(baseDir)}); fix input.paths in the config`,
      );
    }
    for (const m of matches) found.add(path.resolve(m));
  }
  const files = [...found].sort();
  for (const f of files) {
    try {
      await access(f, constants.R_OK);
    } catch (e) {
      throw unreadable(f, e);
    }
  }
  return files;
}
