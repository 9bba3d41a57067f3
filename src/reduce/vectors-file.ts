/** vectors.arrow: `id: uint32, term: utf8, vector: FixedSizeList<float32>[d]`, sorted by id. */
import type { Data, Schema as ArrowSchema, FixedSizeList as FixedSizeListType, Float32 as Float32Type } from 'apache-arrow';
import { Field, FixedSizeList, Float32, makeData, Schema, Uint32, Utf8 } from '../store/arrow.js';
import { KindredError } from '../errors.js';
import { readArrowTable } from '../store/shards.js';
import { ArrowFileSink, utf8Data } from '../store/arrow-sink.js';

export const VECTORS_FILE = 'vectors.arrow';

/** Rows per record batch: about 2 MiB of floats at d = 100. */
const BATCH_ROWS = 1 << 13;

function vectorsSchema(dim: number): ArrowSchema {
  return new Schema([
    new Field('id', new Uint32(), false),
    new Field('term', new Utf8(), false),
    new Field('vector', new FixedSizeList(dim, new Field('item', new Float32(), false)), false),
  ]);
}

/** Writes terms[i] with row i of the row-major `vectors` (terms.length × dim), rounded to float32. */
export async function writeVectors(file: string, terms: readonly string[], vectors: Float64Array, dim: number): Promise<void> {
  if (vectors.length !== terms.length * dim) throw new RangeError(`writeVectors: ${vectors.length} values for ${terms.length}×${dim}`);
  const schema = vectorsSchema(dim);
  const listType = schema.fields[2].type as FixedSizeListType<Float32Type>;
  const sink = new ArrowFileSink(file, schema);
  const batch = (start: number, end: number): Data[] => {
    const n = end - start;
    const ids = new Uint32Array(n);
    for (let i = 0; i < n; i++) ids[i] = start + i;
    const values = Float32Array.from(vectors.subarray(start * dim, end * dim));
    const child = makeData({ type: new Float32(), length: n * dim, nullCount: 0, data: values });
    return [
      makeData({ type: new Uint32(), length: n, nullCount: 0, data: ids }),
      utf8Data(terms.slice(start, end)),
      makeData({ type: listType, length: n, nullCount: 0, child }),
    ];
  };
  for (let start = 0; start < terms.length; start += BATCH_ROWS) {
    const end = Math.min(terms.length, start + BATCH_ROWS);
    sink.write(batch(start, end), end - start);
  }
  await sink.close(() => batch(0, 0));
}

/** Term vectors as read back: row i (id i) is data[i·dim … (i+1)·dim). */
export interface TermVectors {
  terms: string[];
  dim: number;
  data: Float32Array;
}

export function readVectors(file: string): TermVectors {
  const table = readArrowTable(file);
  const id = table.getChild('id');
  const term = table.getChild('term');
  const vector = table.getChild('vector');
  if (!id || !term || !vector) throw new KindredError(`${file}: missing one of the columns id, term, vector`);
  const type = vector.type as unknown;
  if (!(type instanceof FixedSizeList)) throw new KindredError(`${file}: column vector is not a fixed-size list`);
  const dim = type.listSize;
  const n = table.numRows;
  const data = new Float32Array(n * dim);
  let row = 0;
  for (const chunk of vector.data) {
    const child = chunk.children[0];
    const values = child.values as Float32Array;
    const start = child.offset + chunk.offset * dim;
    data.set(values.subarray(start, start + chunk.length * dim), row * dim);
    row += chunk.length;
  }
  const ids = id.toArray() as Uint32Array;
  for (let i = 0; i < n; i++) {
    if (ids[i] !== i) throw new KindredError(`${file}: row ${i} has id ${ids[i]}; vectors.arrow must be sorted by id from 0`);
  }
  return { terms: Array.from(term.toArray() as string[]), dim, data };
}
