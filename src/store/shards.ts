import { readFileSync, promises as fsp } from 'node:fs';
import type { FileHandle } from 'node:fs/promises';
import type { Data } from 'apache-arrow';
import { RecordBatchReader, Schema, Field, makeData, tableFromIPC, Float32, Float64, Uint32 } from './arrow.js';
import type { Table, AsyncRecordBatchFileReader, AsyncRecordBatchStreamReader } from 'apache-arrow';
import { KindredError } from '../errors.js';
import type { RowBlock } from '../weight/types.js';
import { giveBuffer, takeBuffer } from './buffer-pool.js';
import { ArrowFileSink, type FileChecksum } from './arrow-sink.js';

/** The file name of shard `index`: part-00000.arrow, part-00001.arrow … */
export function partFileName(index: number): string {
  return `part-${String(index).padStart(5, '0')}.arrow`;
}

export type ShardValueType = 'float32' | 'float64';

/**
 * Entries buffered before a record batch is written: a writer's arrays take 1 MiB (at 2^20 entries, 16 MiB of
 * fresh memory per shard cost the count stage about a tenth of its time on Brown ×10).
 */
const BATCH_ENTRIES = 1 << 16;

/** Copies entries [from, from + m) to the batch arrays at `at`, values divided by `divisor`. */
function copyEntries(
  rows: Uint32Array, cols: Uint32Array, values: Float64Array, from: number, m: number, divisor: number,
  toRows: Uint32Array, toCols: Uint32Array, toValues: Float64Array, at: number,
): void {
  for (let i = 0; i < m; i++) {
    toRows[at + i] = rows[from + i];
    toCols[at + i] = cols[from + i];
    toValues[at + i] = values[from + i] / divisor;
  }
}

/**
 * Copies a block's entries [from, to) to the batch arrays at `at`, each with its row (rows counted from r, the
 * row holding entry `from` or one before it); returns the row holding the last entry copied.
 */
function copyBlockEntries(
  indptr: Uint32Array, cols: Uint32Array, values: Float64Array, firstRow: number, r: number, from: number, to: number,
  toRows: Uint32Array, toCols: Uint32Array, toValues: Float64Array, at: number,
): number {
  let k = at;
  for (let p = from; p < to;) {
    while (indptr[r + 1] <= p) r++;
    const rowEnd = Math.min(indptr[r + 1], to);
    const id = firstRow + r;
    for (; p < rowEnd; p++) {
      toRows[k] = id;
      toCols[k] = cols[p];
      toValues[k++] = values[p];
    }
  }
  return r;
}

/**
 * Streams (row, col, value) triplets, already sorted by (row, col), into one Arrow IPC file
 * (`row: uint32, col: uint32, value: float32|float64`), one record batch per BATCH_ENTRIES.
 */
export class ShardWriter {
  private readonly sink: ArrowFileSink;
  /** One pooled buffer holds the batch's columns: values (float64), rows, cols, and a float32 copy of values. */
  private readonly buf = takeBuffer(20 * BATCH_ENTRIES);
  private readonly values = new Float64Array(this.buf.buffer, this.buf.byteOffset, BATCH_ENTRIES);
  private readonly rows = new Uint32Array(this.buf.buffer, this.buf.byteOffset + 8 * BATCH_ENTRIES, BATCH_ENTRIES);
  private readonly cols = new Uint32Array(this.buf.buffer, this.buf.byteOffset + 12 * BATCH_ENTRIES, BATCH_ENTRIES);
  /** The float32 copy of a batch's values, for float32 shards. */
  private readonly values32 = new Float32Array(this.buf.buffer, this.buf.byteOffset + 16 * BATCH_ENTRIES, BATCH_ENTRIES);
  private fill = 0;
  entries = 0;

  constructor(readonly file: string, private readonly valueType: ShardValueType) {
    const schema = new Schema([
      new Field('row', new Uint32(), false),
      new Field('col', new Uint32(), false),
      new Field('value', valueType === 'float32' ? new Float32() : new Float64(), false),
    ]);
    this.sink = new ArrowFileSink(file, schema);
  }

  append(row: number, col: number, value: number): void {
    this.rows[this.fill] = row;
    this.cols[this.fill] = col;
    this.values[this.fill] = value;
    this.fill++;
    this.entries++;
    if (this.fill === BATCH_ENTRIES) this.flushBatch();
  }

  /** Appends one row's entries: columns cols[0, n) ascending, each value valuesByCol[col] / divisor. */
  appendRow(row: number, cols: Uint32Array, valuesByCol: Float64Array, n: number, divisor: number): void {
    for (let i = 0; i < n; i++) {
      const c = cols[i];
      this.rows[this.fill] = row;
      this.cols[this.fill] = c;
      this.values[this.fill] = valuesByCol[c] / divisor;
      if (++this.fill === BATCH_ENTRIES) this.flushBatch();
    }
    this.entries += n;
  }

  /**
   * Appends entries (rows[i], cols[i], values[i] / divisor) for i in [0, n), in order. The copying loops take a
   * batch's room at a time, with no flush among them (a rare path met inside a compiled loop makes V8 drop the
   * loop's code and compile it again).
   */
  appendColumns(rows: Uint32Array, cols: Uint32Array, values: Float64Array, n: number, divisor: number): void {
    for (let from = 0; from < n;) {
      const m = Math.min(n - from, BATCH_ENTRIES - this.fill);
      copyEntries(rows, cols, values, from, m, divisor, this.rows, this.cols, this.values, this.fill);
      this.fill += m;
      this.entries += m;
      from += m;
      if (this.fill === BATCH_ENTRIES) this.flushBatch();
    }
  }

  /** Appends every entry of a row block, a batch's room at a time. */
  appendBlock(block: RowBlock): void {
    const { indptr, cols, values, firstRow } = block;
    const end = indptr[indptr.length - 1];
    let r = 0;
    for (let p = indptr[0]; p < end;) {
      const m = Math.min(end - p, BATCH_ENTRIES - this.fill);
      r = copyBlockEntries(indptr, cols, values, firstRow, r, p, p + m, this.rows, this.cols, this.values, this.fill);
      this.fill += m;
      this.entries += m;
      p += m;
      if (this.fill === BATCH_ENTRIES) this.flushBatch();
    }
  }

  private flushBatch(): void {
    const n = this.fill;
    if (n === 0) return;
    this.sink.write(this.children(n), n);
    this.fill = 0;
  }

  /**
   * The batch's columns as views of the writer's own arrays, not copies: the sink writes each batch into the file
   * before write() returns, so the arrays are free for the next batch (fresh memory is slow to touch).
   */
  private children(n: number): Data[] {
    let values: Float32Array | Float64Array = this.values.subarray(0, n);
    if (this.valueType === 'float32') {
      this.values32.set(values);
      values = this.values32.subarray(0, n);
    }
    return [
      makeData({ type: new Uint32(), length: n, nullCount: 0, data: this.rows.subarray(0, n) }),
      makeData({ type: new Uint32(), length: n, nullCount: 0, data: this.cols.subarray(0, n) }),
      makeData({ type: this.valueType === 'float32' ? new Float32() : new Float64(), length: n, nullCount: 0, data: values }),
    ];
  }

  /** The file's size and SHA-256, once closed. */
  get checksum(): FileChecksum | null {
    return this.sink.checksum;
  }

  /** Writes the footer, syncs and closes the file. */
  async close(): Promise<void> {
    await this.end();
  }

  /**
   * Writes the rest of the file now; the returned promise settles once it is synced to disk (ArrowFileSink.end),
   * so that the caller may go on meanwhile.
   */
  end(): Promise<void> {
    try {
      this.flushBatch();
      return this.sink.end(() => this.children(0));
    } finally {
      giveBuffer(this.buf);
    }
  }
}

/**
 * Files being synced to disk (ShardWriter.end), waited for together: the first failure is kept (and no rejection
 * goes unhandled meanwhile) and thrown by done().
 */
export class Syncing {
  private readonly pending: Promise<void>[] = [];
  private failure: { error: unknown } | null = null;

  add(synced: Promise<void>): void {
    this.pending.push(synced.catch((e: unknown) => {
      this.failure ??= { error: e };
    }));
  }

  async done(): Promise<void> {
    await Promise.all(this.pending.splice(0));
    if (this.failure !== null) throw this.failure.error;
  }
}

/** Reads an Arrow IPC file whole. */
export function readArrowTable(file: string): Table {
  let bytes: Buffer;
  try {
    bytes = readFileSync(file);
  } catch (e) {
    throw new KindredError(`cannot read ${file}: ${(e as NodeJS.ErrnoException).code ?? String(e)}`);
  }
  try {
    return tableFromIPC(bytes);
  } catch (e) {
    throw new KindredError(`${file}: not a readable Arrow IPC file (${(e as Error).message})`);
  }
}

/** Reads a shard of rows [firstRow, endRow) into compressed sparse row form. */
export function readShard(file: string, firstRow: number, endRow: number): RowBlock {
  const table = readArrowTable(file);
  const rowCol = table.getChild('row');
  const colCol = table.getChild('col');
  const valCol = table.getChild('value');
  if (!rowCol || !colCol || !valCol) throw new KindredError(`${file}: missing one of the columns row, col, value`);
  const rows = rowCol.toArray() as Uint32Array;
  const cols = colCol.toArray() as Uint32Array;
  const raw = valCol.toArray() as Float32Array | Float64Array;
  const values = raw instanceof Float64Array ? raw : Float64Array.from(raw);
  const nRows = endRow - firstRow;
  const indptr = new Uint32Array(nRows + 1);
  for (let i = 0; i < rows.length; i++) {
    const r = rows[i] - firstRow;
    if (r < 0 || r >= nRows) throw new KindredError(`${file}: row ${rows[i]} lies outside the shard's range [${firstRow}, ${endRow})`);
    indptr[r + 1]++;
  }
  for (let r = 0; r < nRows; r++) indptr[r + 1] += indptr[r];
  return { firstRow, indptr, cols: cols.slice(), values };
}

/**
 * Streams a shard of rows [firstRow, endRow) as blocks of complete rows, one record batch at a time, so a
 * reader's memory is bounded by a batch (plus a row that spans batches) rather than by the shard.
 */
export async function* readShardBlocks(file: string, firstRow: number, endRow: number): AsyncGenerator<RowBlock> {
  let handle: FileHandle;
  try {
    handle = await fsp.open(file, 'r');
  } catch (e) {
    throw new KindredError(`cannot read ${file}: ${(e as NodeJS.ErrnoException).code ?? String(e)}`);
  }
  try {
    let reader: AsyncRecordBatchFileReader | AsyncRecordBatchStreamReader;
    try {
      reader = await RecordBatchReader.from(handle);
      await reader.open();
    } catch (e) {
      throw new KindredError(`${file}: not a readable Arrow IPC file (${(e as Error).message})`);
    }
    // entries of the last row seen, which may continue in the next batch
    let carryRows = new Uint32Array(0);
    let carryCols = new Uint32Array(0);
    let carryValues = new Float64Array(0);
    for await (const batch of reader) {
      const rowCol = batch.getChild('row');
      const colCol = batch.getChild('col');
      const valCol = batch.getChild('value');
      if (!rowCol || !colCol || !valCol) throw new KindredError(`${file}: missing one of the columns row, col, value`);
      const rawValues = valCol.toArray() as Float32Array | Float64Array;
      const rows = concatU32(carryRows, rowCol.toArray() as Uint32Array);
      const cols = concatU32(carryCols, colCol.toArray() as Uint32Array);
      const values = concatF64(carryValues, rawValues);
      if (rows.length === 0) continue;
      // everything before the last row's first entry is complete
      const lastRow = rows[rows.length - 1];
      let cut = rows.length;
      while (cut > 0 && rows[cut - 1] === lastRow) cut--;
      carryRows = rows.slice(cut);
      carryCols = cols.slice(cut);
      carryValues = values.slice(cut);
      if (cut > 0) yield toRowBlock(file, rows.subarray(0, cut), cols.subarray(0, cut), values.subarray(0, cut), firstRow, endRow);
    }
    if (carryRows.length > 0) yield toRowBlock(file, carryRows, carryCols, carryValues, firstRow, endRow);
  } finally {
    await handle.close();
  }
}

function concatU32(a: Uint32Array, b: Uint32Array): Uint32Array {
  if (a.length === 0) return b;
  const out = new Uint32Array(a.length + b.length);
  out.set(a);
  out.set(b, a.length);
  return out;
}

function concatF64(a: Float64Array, b: Float32Array | Float64Array): Float64Array {
  if (a.length === 0 && b instanceof Float64Array) return b;
  const out = new Float64Array(a.length + b.length);
  out.set(a);
  out.set(b, a.length);
  return out;
}

/** Complete rows (sorted by row) as a block that starts at their first row. */
function toRowBlock(file: string, rows: Uint32Array, cols: Uint32Array, values: Float64Array, firstRow: number, endRow: number): RowBlock {
  const start = rows[0];
  const last = rows[rows.length - 1];
  if (start < firstRow || last >= endRow) {
    throw new KindredError(`${file}: row ${start < firstRow ? start : last} lies outside the shard's range [${firstRow}, ${endRow})`);
  }
  const indptr = new Uint32Array(last - start + 2);
  for (let i = 0; i < rows.length; i++) indptr[rows[i] - start + 1]++;
  for (let r = 0; r < last - start + 1; r++) indptr[r + 1] += indptr[r];
  // views, not copies: every batch the reader yields is fresh memory, and the weighting never writes its input
  return { firstRow: start, indptr, cols, values };
}
