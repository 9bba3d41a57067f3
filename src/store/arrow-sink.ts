/**
 * Streams record batches of one schema into an Arrow IPC file, so tables larger than memory (neighbour lists of
 * every term, vectors of 100,000 terms) are written batch by batch.
 */
import { createHash } from 'node:crypto';
import { closeSync, fsync, openSync } from 'node:fs';
import type { Data, Schema, Utf8 as Utf8Type } from 'apache-arrow';
import { AsyncByteQueue, makeData, RecordBatch, RecordBatchFileWriter, Struct, Utf8 } from './arrow.js';
import { wrapWriteError, writeBytesOrThrow } from './atomic.js';

const encoder = new TextEncoder();
const SURROGATE = /[\uD800-\uDFFF]/;

/** Utf8 column data for `strings` (no nulls). */
export function utf8Data(strings: readonly string[]): Data<Utf8Type> {
  const offsets = new Int32Array(strings.length + 1);
  // one encoding of all the strings together, cut at each string's own byte length; with surrogates (a lone one
  // could pair up with its neighbour's across the join) the strings are encoded one by one
  const joined = strings.join('');
  let bytes: Uint8Array = Buffer.from(joined, 'utf8');
  for (let i = 0; i < strings.length; i++) offsets[i + 1] = offsets[i] + Buffer.byteLength(strings[i], 'utf8');
  if (offsets[strings.length] !== bytes.length || SURROGATE.test(joined)) {
    const encoded = strings.map((s) => encoder.encode(s));
    for (let i = 0; i < encoded.length; i++) offsets[i + 1] = offsets[i] + encoded[i].length;
    bytes = new Uint8Array(offsets[strings.length]);
    for (let i = 0; i < encoded.length; i++) bytes.set(encoded[i], offsets[i]);
  }
  return makeData({ type: new Utf8(), length: strings.length, nullCount: 0, valueOffsets: offsets, data: bytes });
}

/**
 * The byte sink of an Arrow writer that puts every chunk straight into the file: apache-arrow's writers write
 * into an AsyncByteQueue and keep the bytes until a reader pulls them, which no one does while a synchronous
 * loop (the merge) writes; handing the writer this subclass (its public `reset(sink)`) makes memory stay at
 * one batch whatever the file's size.
 */
class FileByteSink extends AsyncByteQueue {
  /** SHA-256 and size of everything written, so the file need not be read back to be checksummed. */
  readonly hash = createHash('sha256');
  bytes = 0;

  constructor(private readonly fd: number, private readonly file: string) {
    super();
  }

  override write(value: Uint8Array): void {
    writeBytesOrThrow(this.fd, value, value.byteLength, this.file);
    this.hash.update(value);
    this.bytes += value.byteLength;
  }
}

/** A written file's size and SHA-256 (hex). */
export interface FileChecksum {
  bytes: number;
  sha256: string;
}

export class ArrowFileSink {
  private readonly fd: number;
  private readonly writer = new RecordBatchFileWriter();
  private readonly sink: FileByteSink;
  private wroteAny = false;
  rows = 0;
  /** The file's size and SHA-256, once closed. */
  checksum: FileChecksum | null = null;

  constructor(readonly file: string, private readonly schema: Schema) {
    try {
      this.fd = openSync(file, 'w');
    } catch (e) {
      throw wrapWriteError(e, file);
    }
    this.sink = new FileByteSink(this.fd, file);
    this.writer.reset(this.sink);
  }

  /** Writes one batch; `children` follow the schema's fields, each of `length` rows. */
  write(children: Data[], length: number): void {
    const batch = new RecordBatch(this.schema, makeData({ type: new Struct(this.schema.fields), length, nullCount: 0, children }));
    // one schema object for every batch, so the writer keeps a single stream
    this.writer.write(batch);
    this.rows += length;
    this.wroteAny = true;
  }

  /** Writes the footer (an empty batch first when nothing was written, so the file has the schema), syncs, closes. */
  async close(emptyChildren: () => Data[]): Promise<void> {
    await this.end(emptyChildren);
  }

  /**
   * Writes the footer and takes the checksum now; the returned promise settles once the file is synced to disk
   * and closed. The sync runs on libuv's threads, so the caller may go on working meanwhile (it must handle the
   * promise at once, and wait for it before the file counts as written).
   */
  end(emptyChildren: () => Data[]): Promise<void> {
    try {
      if (!this.wroteAny) this.write(emptyChildren(), 0);
      this.writer.finish();
      this.checksum = { bytes: this.sink.bytes, sha256: this.sink.hash.digest('hex') };
    } catch (e) {
      closeSync(this.fd);
      throw wrapWriteError(e, this.file);
    }
    return new Promise((resolve, reject) => {
      fsync(this.fd, (err) => {
        try {
          closeSync(this.fd);
        } catch (e) {
          err ??= e as NodeJS.ErrnoException;
        }
        if (err) reject(wrapWriteError(err, this.file));
        else resolve();
      });
    });
  }
}
