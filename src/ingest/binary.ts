/**
 * What kindred treats as binary input, and the size limit of one document.
 *
 * A file is binary when the first BINARY_SNIFF_BYTES bytes of its content (after gunzip) hold a NUL byte:
 * UTF-8 text never contains one, while images, archives, executables and UTF-16 text almost always do
 * within the first few KiB (common practice, no source: version-control and search tools sniff the same way).
 * A NUL byte found later, in a line or a record's text, makes that line or record bad.
 */
import { closeSync, constants, fstatSync, openSync, readSync } from 'node:fs';
import { constants as zlibConstants, gunzipSync } from 'node:zlib';
import type { InputConfig } from '../config/types.js';
import { KindredError } from '../errors.js';
import { fsErrorFor } from './fs-errors.js';
import type { IngestStats } from './types.js';

export const BINARY_SNIFF_BYTES = 8192;

/**
 * The longest line (text-lines, jsonl) or file (text-file) read as one document: 256 MiB, well below the
 * longest string JavaScript can hold (about 512 Mi UTF-16 code units), so an overlong line is a clean error.
 */
export const MAX_DOCUMENT_BYTES = 256 * 1024 * 1024;

/** Raw bytes read to find BINARY_SNIFF_BYTES of content in a gzip file (compressed text is rarely 8:1 smaller). */
const SNIFF_READ_BYTES = 1 << 16;

/** The offset of the first NUL byte in the first BINARY_SNIFF_BYTES of the file's content, or -1. */
export function sniffBinary(file: string): number {
  let fd: number;
  try {
    // O_NONBLOCK: a FIFO must not block the open; only regular files are sniffed (the reader refuses the rest)
    fd = openSync(file, constants.O_RDONLY | constants.O_NONBLOCK);
  } catch (e) {
    throw fsErrorFor(file, e);
  }
  const head = Buffer.alloc(SNIFF_READ_BYTES);
  let n: number;
  try {
    if (!fstatSync(fd).isFile()) return -1;
    n = readSync(fd, head, 0, SNIFF_READ_BYTES, 0);
  } catch (e) {
    throw fsErrorFor(file, e);
  } finally {
    closeSync(fd);
  }
  let content = head.subarray(0, n);
  if (n >= 2 && content[0] === 0x1f && content[1] === 0x8b) {
    try {
      // a prefix of a gzip stream: inflate what is there without requiring its end
      content = gunzipSync(content, { finishFlush: zlibConstants.Z_SYNC_FLUSH });
    } catch {
      return -1; // corrupt gzip data: the reader reports it, naming the file
    }
  }
  return content.subarray(0, BINARY_SNIFF_BYTES).indexOf(0);
}

/**
 * Applies input.onBadRecord to a binary file: a one-line error under "fail"; under "skip" it is counted
 * (when `count`, so a file read in several splits counts once) and the caller skips the whole file.
 */
export function binaryFile(file: string, offset: number, input: InputConfig, stats: IngestStats, count = true): void {
  if (input.onBadRecord === 'fail') {
    throw new KindredError(
      `${file}: looks like a binary file (a NUL byte at content byte ${offset}); kindred reads UTF-8 text: ` +
        'remove it from input.paths, convert it to UTF-8 (UTF-16 text has NUL bytes), or set input.onBadRecord to "skip"',
    );
  }
  if (count) stats.binaryFilesSkipped++;
}

/** True when the file must be skipped as binary (under "skip"); throws under "fail". */
export function skipBinaryFile(file: string, input: InputConfig, stats: IngestStats, count = true): boolean {
  const offset = sniffBinary(file);
  if (offset === -1) return false;
  binaryFile(file, offset, input, stats, count);
  return true;
}

/** True when bytes[start, end) hold a NUL byte. */
export function hasNul(bytes: Uint8Array, start: number, end: number): boolean {
  return bytes.subarray(start, end).indexOf(0) !== -1;
}

/** Why a NUL byte past the sniffed head makes a line bad. */
export const NUL_LINE_REASON = 'a NUL byte: binary data in a text file?';

/** Why a line over the limit is refused (the same words for every format). */
export function overlongReason(maxBytes: number): string {
  const size = maxBytes >= 1 << 20 ? `${Math.round(maxBytes / (1 << 20))} MiB` : `${maxBytes} bytes`;
  return `longer than ${size}; kindred holds one document in memory, so split such lines`;
}

/** Applies input.onBadRecord to an unusable line (or text-file document): throws under 'fail', counts under 'skip'. */
export function badTextLine(input: InputConfig, stats: IngestStats, where: string, reason: string, what = 'line'): void {
  if (input.onBadRecord === 'fail') {
    throw new KindredError(`${where}: unusable ${what} (${reason}); fix the ${what} or set input.onBadRecord to "skip"`);
  }
  stats.badRecordsSkipped++;
}
