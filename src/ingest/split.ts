/**
 * Input splits for parallel reading: plain (not gzipped) line-based files are cut into byte ranges that start
 * right after a line end, so every record lies in exactly one split; gzipped files and whole-file formats
 * (json-array, text-file) are one split each. Documents of a split are handed over as UTF-8 bytes when they
 * are all ASCII, else as decoded text.
 */
import { closeSync, openSync, readSync, statSync } from 'node:fs';
import type { InputConfig } from '../config/types.js';
import { KindredError } from '../errors.js';
import { NON_ASCII, scanBytes } from '../tokenize/bytes.js';
import { oneLine, readContentBytes } from './bytes.js';
import { fsErrorFor } from './fs-errors.js';
import { MAX_DOCUMENT_BYTES, NUL_LINE_REASON, badTextLine, hasNul, overlongReason, skipBinaryFile } from './binary.js';
import { formatOf, makeContext, READERS } from './readers.js';
import { parseFieldPath, recordFields } from './records.js';
import type { IngestStats } from './types.js';
import { Utf8LineDecoder } from './utf8.js';
import { giveBuffer, takeBuffer } from '../store/buffer-pool.js';

/** One unit of reading work. */
export interface InputSplit {
  file: string;
  /** Byte range [start, end) of the file; for a whole-file split 0 and the file's size. */
  start: number;
  end: number;
  /** True when the split is a whole file read by its format's streaming reader (gzip, json-array, text-file). */
  whole: boolean;
}

/** Receives a split's documents in order. */
export interface DocumentSink {
  /** An all-ASCII document, bytes[start, end). */
  bytes(bytes: Uint8Array, start: number, end: number): void;
  /** Any other document. */
  text(text: string): void;
}

const GZIP_MAGIC = [0x1f, 0x8b];
const SCAN_BYTES = 1 << 16;
const READ_BYTES = 1 << 20;
const NON_SPACE = /\S/;

function openOrThrow(file: string): number {
  try {
    return openSync(file, 'r');
  } catch (e) {
    throw fsErrorFor(file, e);
  }
}

function isGzip(fd: number): boolean {
  const b = Buffer.alloc(2);
  return readSync(fd, b, 0, 2, 0) === 2 && b[0] === GZIP_MAGIC[0] && b[1] === GZIP_MAGIC[1];
}

/** The first offset ≥ from that starts a line (just after a LF), or size. */
function nextLineStart(fd: number, from: number, size: number): number {
  const buf = Buffer.allocUnsafe(SCAN_BYTES);
  let at = from;
  while (at < size) {
    const n = readSync(fd, buf, 0, Math.min(SCAN_BYTES, size - at), at);
    if (n <= 0) break;
    const nl = buf.subarray(0, n).indexOf(0x0a);
    if (nl !== -1) return at + nl + 1;
    at += n;
  }
  return size;
}

/**
 * Cuts the files into splits of about targetBytes. Splits follow file order and, within a file, byte order,
 * so concatenating their documents gives the corpus in order.
 */
export function planSplits(files: string[], input: InputConfig, targetBytes: number): InputSplit[] {
  const out: InputSplit[] = [];
  for (const file of files) {
    const fd = openOrThrow(file);
    try {
      const size = statSync(file).size;
      const format = formatOf(file, input.format);
      const lineBased = format === 'text-lines' || format === 'jsonl';
      if (!lineBased || isGzip(fd) || size <= targetBytes) {
        out.push({ file, start: 0, end: size, whole: !lineBased || isGzip(fd) });
        continue;
      }
      const n = Math.ceil(size / targetBytes);
      let start = 0;
      for (let i = 1; i <= n && start < size; i++) {
        const end = i === n ? size : nextLineStart(fd, Math.max(start, Math.floor((size * i) / n) - 1), size);
        if (end > start) out.push({ file, start, end, whole: false });
        start = end;
      }
    } finally {
      closeSync(fd);
    }
  }
  return out;
}

/** Number of line ends in file[0, offset): the line number of the line starting at offset, minus one. */
function linesBefore(file: string, offset: number): number {
  const fd = openOrThrow(file);
  const buf = Buffer.allocUnsafe(READ_BYTES);
  let lines = 0;
  try {
    for (let at = 0; at < offset; ) {
      const n = readSync(fd, buf, 0, Math.min(READ_BYTES, offset - at), at);
      if (n <= 0) break;
      for (let i = buf.indexOf(0x0a); i !== -1 && i < n; i = buf.indexOf(0x0a, i + 1)) lines++;
      at += n;
    }
  } finally {
    closeSync(fd);
  }
  return lines;
}

/**
 * Splits chunks into lines (LF ends a line, a CR before it is removed) and hands each to a line handler.
 * A line spanning chunks is kept as a list of copied pieces and joined once (linear in its length); a line
 * longer than maxLineBytes is not kept at all and goes to onOverlong instead.
 */
class LineFeeder {
  private carry: Buffer[] = [];
  private carried = 0;
  private overlong = false;
  constructor(
    private readonly onLine: (bytes: Uint8Array, start: number, end: number) => void,
    private readonly onOverlong: () => void = () => {},
    private readonly maxLineBytes = MAX_DOCUMENT_BYTES,
  ) {}

  push(chunk: Buffer): void {
    let start = 0;
    let nl = chunk.indexOf(0x0a);
    if ((this.carried > 0 || this.overlong) && nl !== -1) {
      if (this.overlong || this.carried + nl > this.maxLineBytes) {
        this.dropCarry();
        this.onOverlong();
      } else {
        const line = Buffer.concat([...this.carry, chunk.subarray(0, nl)]);
        this.dropCarry();
        this.line(line, 0, line.length);
      }
      start = nl + 1;
      nl = chunk.indexOf(0x0a, start);
    }
    for (; nl !== -1; nl = chunk.indexOf(0x0a, start)) {
      if (nl - start > this.maxLineBytes) this.onOverlong();
      else this.line(chunk, start, nl);
      start = nl + 1;
    }
    if (start < chunk.length && !this.overlong) {
      this.carried += chunk.length - start;
      if (this.carried > this.maxLineBytes) {
        this.carry = [];
        this.overlong = true;
      } else {
        // a copy: readRange reuses its buffer
        this.carry.push(Buffer.from(chunk.subarray(start)));
      }
    }
  }

  end(): void {
    if (this.overlong) {
      this.dropCarry();
      this.onOverlong();
    } else if (this.carried > 0) {
      const line = this.carry.length === 1 ? this.carry[0] : Buffer.concat(this.carry);
      this.dropCarry();
      this.line(line, 0, line.length);
    }
  }

  private dropCarry(): void {
    this.carry = [];
    this.carried = 0;
    this.overlong = false;
  }

  private line(bytes: Uint8Array, start: number, end: number): void {
    this.onLine(bytes, start, end > start && bytes[end - 1] === 0x0d ? end - 1 : end);
  }
}

/**
 * Reads one split, handing its documents to sink. Counts into stats as the streaming readers of readers.ts do
 * (a file is counted by the split that starts it). onDiskBytes receives bytes read from disk as they are read.
 */
export async function readSplit(
  split: InputSplit, input: InputConfig, stats: IngestStats, sink: DocumentSink, onProgress: (n: number) => void,
  maxLineBytes = MAX_DOCUMENT_BYTES,
): Promise<void> {
  const { file } = split;
  const onDiskBytes = (n: number): void => {
    stats.bytes += n;
    onProgress(n);
  };
  const format = formatOf(file, input.format);
  if (split.whole && format !== 'text-lines' && format !== 'jsonl') {
    const ctx = makeContext(input, stats, onDiskBytes, maxLineBytes);
    stats.files++;
    for await (const doc of READERS[format](file, ctx)) sink.text(doc.text);
    return;
  }
  if (split.start === 0) stats.files++;
  // a binary file is refused, or skipped whole (counted once, by the split that starts the file)
  if (skipBinaryFile(file, input, stats, split.start === 0)) return;
  const decoder = new Utf8LineDecoder();
  let line = 0;
  const textPath = parseFieldPath(input.textField);
  const idPath = input.idField === null ? null : parseFieldPath(input.idField);
  const where = (): string => `${file}:${(split.start > 0 ? linesBefore(file, split.start) : 0) + line}`;
  const onLine =
    format === 'text-lines'
      ? (bytes: Uint8Array, start: number, end: number): void => {
          line++;
          if (end === start) return;
          if (hasNul(bytes, start, end)) {
            badTextLine(input, stats, where(), NUL_LINE_REASON);
            return;
          }
          const found = scanBytes(bytes, start, end);
          if ((found & NON_ASCII) === 0) {
            if (found === 0) return;
            stats.documents++;
            sink.bytes(bytes, start, end);
            return;
          }
          const text = decoder.decode(Buffer.from(bytes.buffer, bytes.byteOffset + start, end - start));
          if (!NON_SPACE.test(text)) return;
          stats.documents++;
          sink.text(text);
        }
      : (bytes: Uint8Array, start: number, end: number): void => {
          line++;
          if (end === start) return;
          const text = decoder.decode(Buffer.from(bytes.buffer, bytes.byteOffset + start, end - start));
          if (!NON_SPACE.test(text)) return;
          let value: unknown;
          try {
            value = JSON.parse(text);
          } catch (e) {
            badRecord(input, stats, where(), e instanceof Error ? e.message : String(e));
            return;
          }
          const fields = recordFields(value, textPath, input.textField, idPath, input.idField);
          if (!fields.ok) {
            badRecord(input, stats, where(), fields.reason);
            return;
          }
          stats.documents++;
          sink.text(fields.text);
        };
  const onOverlong = (): void => {
    line++;
    if (format === 'text-lines') badTextLine(input, stats, where(), overlongReason(maxLineBytes));
    else badRecord(input, stats, where(), overlongReason(maxLineBytes));
  };
  const feeder = new LineFeeder(onLine, onOverlong, maxLineBytes);
  try {
    if (split.whole) {
      for await (const chunk of readContentBytes(file, onDiskBytes)) feeder.push(chunk);
    } else {
      readRange(split, onDiskBytes, (chunk) => feeder.push(chunk));
    }
    feeder.end();
  } finally {
    stats.invalidUtf8Replaced += decoder.replaced;
  }
}

/**
 * Reads file[start, end) in chunks through one buffer, reused by the thread's next split (fresh memory is slow to
 * touch); a leading UTF-8 byte-order mark is skipped. onChunk must not keep the chunk past its call.
 */
function readRange(split: InputSplit, onDiskBytes: (n: number) => void, onChunk: (chunk: Buffer) => void): void {
  const fd = openOrThrow(split.file);
  const buf = takeBuffer(READ_BYTES);
  try {
    for (let at = split.start; at < split.end; ) {
      let n: number;
      try {
        n = readSync(fd, buf, 0, Math.min(READ_BYTES, split.end - at), at);
      } catch (e) {
        throw fsErrorFor(split.file, e);
      }
      if (n <= 0) break;
      onDiskBytes(n);
      let chunk = buf.subarray(0, n);
      if (at === 0 && n >= 3 && chunk[0] === 0xef && chunk[1] === 0xbb && chunk[2] === 0xbf) chunk = chunk.subarray(3);
      at += n;
      onChunk(chunk);
    }
  } finally {
    closeSync(fd);
    giveBuffer(buf);
  }
}

function badRecord(input: InputConfig, stats: IngestStats, where: string, reason: string): void {
  if (input.onBadRecord === 'fail') {
    throw new KindredError(`${where}: invalid JSON record (${oneLine(reason)}); fix the record or set input.onBadRecord to "skip"`);
  }
  stats.badRecordsSkipped++;
}
