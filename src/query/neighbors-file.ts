/**
 * neighbors.arrow: one row per (term, neighbour), sorted by term id then rank:
 * `term: utf8, rank: uint32, neighbor: utf8, score: float64, distance: float64, term_id: uint32, neighbor_id: uint32`.
 */
import type { Data, Schema as ArrowSchema } from 'apache-arrow';
import { Field, Float64, makeData, Schema, Uint32, Utf8 } from '../store/arrow.js';
import { KindredError } from '../errors.js';
import type { MeasureName } from '../measures/index.js';
import { readArrowTable } from '../store/shards.js';
import { ArrowFileSink, utf8Data } from '../store/arrow-sink.js';
import { scoreOf } from './score.js';
import type { TableBlock } from './table.js';

export const NEIGHBORS_FILE = 'neighbors.arrow';

/** Table rows buffered before a record batch is written. */
const BATCH_ROWS = 1 << 16;

function neighborsSchema(): ArrowSchema {
  return new Schema([
    new Field('term', new Utf8(), false),
    new Field('rank', new Uint32(), false),
    new Field('neighbor', new Utf8(), false),
    new Field('score', new Float64(), false),
    new Field('distance', new Float64(), false),
    new Field('term_id', new Uint32(), false),
    new Field('neighbor_id', new Uint32(), false),
  ]);
}

/** Writes blocks of a neighbour table as they come, in record batches of up to BATCH_ROWS rows. */
export class NeighborTableWriter {
  private readonly sink: ArrowFileSink;
  private termIds: number[] = [];
  private ranks: number[] = [];
  private neighborIds: number[] = [];
  private distances: number[] = [];

  constructor(
    file: string,
    private readonly terms: readonly string[],
    private readonly measure: MeasureName,
  ) {
    this.sink = new ArrowFileSink(file, neighborsSchema());
  }

  get rows(): number {
    return this.sink.rows + this.termIds.length;
  }

  append(block: TableBlock): void {
    let at = 0;
    for (let i = 0; i < block.counts.length; i++) {
      const q = block.first + i;
      for (let r = 0; r < block.counts[i]; r++, at++) {
        this.termIds.push(q);
        this.ranks.push(r + 1);
        this.neighborIds.push(block.ids[at]);
        this.distances.push(block.distances[at]);
      }
    }
    if (this.termIds.length >= BATCH_ROWS) this.flush();
  }

  private columns(termIds: number[], ranks: number[], neighborIds: number[], distances: number[]): Data[] {
    const n = termIds.length;
    const dist = Float64Array.from(distances);
    return [
      utf8Data(termIds.map((id) => this.terms[id])),
      makeData({ type: new Uint32(), length: n, nullCount: 0, data: Uint32Array.from(ranks) }),
      utf8Data(neighborIds.map((id) => this.terms[id])),
      makeData({ type: new Float64(), length: n, nullCount: 0, data: dist.map((d) => scoreOf(this.measure, d)) }),
      makeData({ type: new Float64(), length: n, nullCount: 0, data: dist }),
      makeData({ type: new Uint32(), length: n, nullCount: 0, data: Uint32Array.from(termIds) }),
      makeData({ type: new Uint32(), length: n, nullCount: 0, data: Uint32Array.from(neighborIds) }),
    ];
  }

  private flush(): void {
    if (this.termIds.length === 0) return;
    this.sink.write(this.columns(this.termIds, this.ranks, this.neighborIds, this.distances), this.termIds.length);
    this.termIds = [];
    this.ranks = [];
    this.neighborIds = [];
    this.distances = [];
  }

  async close(): Promise<void> {
    this.flush();
    await this.sink.close(() => this.columns([], [], [], []));
  }
}

/** A neighbour table in memory, with the rows of term id t at [start[t], start[t + 1]). */
export interface NeighborTable {
  termIds: Uint32Array;
  ranks: Uint32Array;
  neighborIds: Uint32Array;
  scores: Float64Array;
  distances: Float64Array;
  /** Length vocabulary size + 1. */
  start: Uint32Array;
}

function column<T>(file: string, table: ReturnType<typeof readArrowTable>, name: string): T {
  const c = table.getChild(name);
  if (!c) throw new KindredError(`${file}: missing column ${name}; rebuild the neighbour table`);
  return c.toArray() as T;
}

/** Reads neighbors.arrow whole (its columns are small: the strings are not kept, only ids). */
export function readNeighborTable(file: string, vocabularySize: number): NeighborTable {
  const table = readArrowTable(file);
  const termIds = Uint32Array.from(column<Uint32Array>(file, table, 'term_id'));
  const start = new Uint32Array(vocabularySize + 1);
  for (let i = 0; i < termIds.length; i++) {
    const t = termIds[i];
    if (t >= vocabularySize || (i > 0 && t < termIds[i - 1])) throw new KindredError(`${file}: row ${i} has term_id ${t} out of order or outside the vocabulary`);
    start[t + 1]++;
  }
  for (let t = 0; t < vocabularySize; t++) start[t + 1] += start[t];
  return {
    termIds,
    ranks: Uint32Array.from(column<Uint32Array>(file, table, 'rank')),
    neighborIds: Uint32Array.from(column<Uint32Array>(file, table, 'neighbor_id')),
    scores: Float64Array.from(column<Float64Array>(file, table, 'score')),
    distances: Float64Array.from(column<Float64Array>(file, table, 'distance')),
    start,
  };
}
