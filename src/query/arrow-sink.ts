/**
 * Streams record batches of one schema into an Arrow IPC file, so tables larger than memory (neighbour lists of
 * every term, vectors of 100,000 terms) are written batch by batch.
 */
import { closeSync, fsyncSync, openSync, writeSync } from 'node:fs';
import { makeData, RecordBatch, RecordBatchFileWriter, Struct, Utf8, type Data, type Schema } from 'apache-arrow';
import { wrapWriteError } from '../store/atomic.js';

const encoder = new TextEncoder();

/** Utf8 column data for `strings` (no nulls). */
export function utf8Data(strings: readonly string[]): Data<Utf8> {
  const encoded = strings.map((s) => encoder.encode(s));
  const offsets = new Int32Array(strings.length + 1);
  for (let i = 0; i < encoded.length; i++) offsets[i + 1] = offsets[i] + encoded[i].length;
  const bytes = new Uint8Array(offsets[strings.length]);
  for (let i = 0; i < encoded.length; i++) bytes.set(encoded[i], offsets[i]);
  return makeData({ type: new Utf8(), length: strings.length, nullCount: 0, valueOffsets: offsets, data: bytes });
}

export class ArrowFileSink {
  private readonly fd: number;
  private readonly writer = new RecordBatchFileWriter();
  private readonly pump: Promise<void>;
  private pumpError: unknown = null;
  private wroteAny = false;
  rows = 0;

  constructor(readonly file: string, private readonly schema: Schema) {
    try {
      this.fd = openSync(file, 'w');
    } catch (e) {
      throw wrapWriteError(e, file);
    }
    const fd = this.fd;
    this.pump = (async () => {
      try {
        for await (const chunk of this.writer) writeSync(fd, chunk);
      } catch (e) {
        this.pumpError = wrapWriteError(e, file);
      }
    })();
  }

  /** Writes one batch; `children` follow the schema's fields, each of `length` rows. */
  write(children: Data[], length: number): void {
    if (this.pumpError) throw this.pumpError;
    const batch = new RecordBatch(this.schema, makeData({ type: new Struct(this.schema.fields), length, nullCount: 0, children }));
    // one schema object for every batch, so the writer keeps a single stream
    this.writer.write(batch);
    this.rows += length;
    this.wroteAny = true;
  }

  /** Writes the footer (an empty batch first when nothing was written, so the file has the schema), syncs, closes. */
  async close(emptyChildren: () => Data[]): Promise<void> {
    if (!this.wroteAny) this.write(emptyChildren(), 0);
    this.writer.finish();
    await this.pump;
    try {
      if (this.pumpError) throw this.pumpError;
      fsyncSync(this.fd);
    } finally {
      closeSync(this.fd);
    }
  }
}
