/**
 * Streams record batches of one schema into an Arrow IPC file, so tables larger than memory (neighbour lists of
 * every term, vectors of 100,000 terms) are written batch by batch.
 */
import { closeSync, fsyncSync, openSync, writeSync } from 'node:fs';
import { makeData, RecordBatch, RecordBatchFileWriter, Struct, Utf8, type Data, type Schema } from 'apache-arrow';
import { wrapWriteError } from './atomic.js';

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

/**
 * apache-arrow's writer queues the bytes of each batch until a reader pulls them; nothing pulls while a
 * synchronous loop (a k-way merge) writes, so the queue is emptied into the file by hand after every batch.
 * `_sink._values` is that queue in apache-arrow 21.2.0, which package.json pins exactly.
 */
interface QueuedBytes {
  _sink: { _values: Uint8Array[] };
}

export class ArrowFileSink {
  private readonly fd: number;
  private readonly writer = new RecordBatchFileWriter();
  private wroteAny = false;
  rows = 0;

  constructor(readonly file: string, private readonly schema: Schema) {
    try {
      this.fd = openSync(file, 'w');
    } catch (e) {
      throw wrapWriteError(e, file);
    }
  }

  /** Moves every queued chunk into the file: memory stays at one batch. */
  private drain(): void {
    const queued = (this.writer as unknown as QueuedBytes)._sink._values;
    try {
      for (const chunk of queued.splice(0)) writeSync(this.fd, chunk);
    } catch (e) {
      throw wrapWriteError(e, this.file);
    }
  }

  /** Writes one batch; `children` follow the schema's fields, each of `length` rows. */
  write(children: Data[], length: number): void {
    const batch = new RecordBatch(this.schema, makeData({ type: new Struct(this.schema.fields), length, nullCount: 0, children }));
    // one schema object for every batch, so the writer keeps a single stream
    this.writer.write(batch);
    this.drain();
    this.rows += length;
    this.wroteAny = true;
  }

  /** Writes the footer (an empty batch first when nothing was written, so the file has the schema), syncs, closes. */
  async close(emptyChildren: () => Data[]): Promise<void> {
    try {
      if (!this.wroteAny) this.write(emptyChildren(), 0);
      this.writer.finish();
      this.drain();
      fsyncSync(this.fd);
    } catch (e) {
      throw wrapWriteError(e, this.file);
    } finally {
      closeSync(this.fd);
    }
  }
}
