/**
 * A build loaded once for serving: vocabulary, weighted rows with their column index, vectors and the neighbour
 * table when the build has them. Searchers are made on first use per (source, measure) and kept.
 */
import { existsSync } from 'node:fs';
import path from 'node:path';
import { KindredError } from '../errors.js';
import { getMeasure, type MeasureName } from '../measures/index.js';
import { readVectors, VECTORS_FILE } from '../reduce/vectors-file.js';
import { readManifest, resolveBuildDir, type Manifest } from '../store/manifest.js';
import { readVocabulary, type Vocabulary } from '../store/vocab-file.js';
import { csrRow, denseFromFloat32, denseRow, readWeightedMatrix, transpose } from './matrix.js';
import { NEIGHBORS_FILE, readNeighborTable, type NeighborTable } from './neighbors-file.js';
import { float32Text } from './export.js';
import { scoreOf } from './score.js';
import { NeighborSearcher, type SearchData } from './search.js';
import type { NeighborsRecord } from './table-stage.js';

export type ServedSource = 'rows' | 'vectors';

export interface ServedNeighbor {
  rank: number;
  neighbor: string;
  score: number;
  distance: number;
}

export class ServedBuild {
  readonly manifest: Manifest;
  readonly vocab: Vocabulary;
  private readonly ids = new Map<string, number>();
  readonly rows: SearchData & { kind: 'rows' };
  readonly vectors: (SearchData & { kind: 'vectors' }) | null;
  /** The precomputed table with its settings, when the build has one. */
  readonly table: { record: NeighborsRecord; rows: NeighborTable } | null;
  private readonly searchers = new Map<string, NeighborSearcher>();
  readonly loadedAt = Date.now();

  /** The folder the build path stood for when it was loaded (a later build may switch the path). */
  readonly dir: string;

  constructor(buildPath: string) {
    // resolve a published build's link once, so every file read comes from the same build
    const dir = resolveBuildDir(buildPath);
    this.dir = dir;
    this.manifest = readManifest(dir);
    this.vocab = readVocabulary(path.join(dir, 'vocab.arrow'));
    this.vocab.terms.forEach((t, i) => this.ids.set(t, i));
    const m = this.manifest;
    const parts = m.parts.map((p) => ({ file: p.weightedFile, firstRow: p.firstRow, endRow: p.endRow }));
    const matrix = readWeightedMatrix(dir, parts, m.matrix.rows, m.matrix.cols);
    this.rows = { kind: 'rows', rows: matrix, columns: transpose(matrix) };
    const vectorsFile = path.join(dir, VECTORS_FILE);
    if (existsSync(vectorsFile)) {
      const v = readVectors(vectorsFile);
      if (v.terms.length !== this.vocab.terms.length) throw new KindredError(`${vectorsFile}: ${v.terms.length} vectors for ${this.vocab.terms.length} terms; rebuild`);
      this.vectors = { kind: 'vectors', vectors: denseFromFloat32(v.data, v.terms.length, v.dim) };
    } else {
      this.vectors = null;
    }
    const record = m.neighbors;
    const tableFile = path.join(dir, NEIGHBORS_FILE);
    this.table = record && existsSync(tableFile) ? { record, rows: readNeighborTable(tableFile, this.vocab.terms.length) } : null;
  }

  get size(): number {
    return this.vocab.terms.length;
  }

  /** The id of a term as the vocabulary has it, or undefined. Lookups are exact: callers normalize first. */
  lookup(term: string): number | undefined {
    return this.ids.get(term);
  }

  term(id: number): string {
    return this.vocab.terms[id];
  }

  data(source: ServedSource): SearchData {
    if (source === 'vectors') {
      if (!this.vectors) throw new KindredError(`${this.dir} has no vectors (build it with vectors.enabled true)`);
      return this.vectors;
    }
    return this.rows;
  }

  private searcher(source: ServedSource, measure: MeasureName): NeighborSearcher {
    const key = `${source}:${measure}`;
    let s = this.searchers.get(key);
    if (!s) {
      s = new NeighborSearcher(this.data(source), measure);
      this.searchers.set(key, s);
    }
    return s;
  }

  /** Whether term `id` has a list in the precomputed table for these settings. */
  private fromTable(id: number, source: ServedSource, measure: MeasureName, k: number): ServedNeighbor[] | null {
    const t = this.table;
    if (!t || t.record.measure !== measure || t.record.source !== source || k > t.record.k || id >= t.record.queried) return null;
    const out: ServedNeighbor[] = [];
    for (let p = t.rows.start[id]; p < t.rows.start[id + 1] && out.length < k; p++) {
      out.push({ rank: t.rows.ranks[p], neighbor: this.term(t.rows.neighborIds[p]), score: t.rows.scores[p], distance: t.rows.distances[p] });
    }
    return out;
  }

  /** The k nearest terms of term `id`: from the table when it covers the request, else by an exact search. */
  neighbors(id: number, source: ServedSource, measureName: string, k: number): { neighbors: ServedNeighbor[]; from: 'table' | 'search' } {
    const measure = getMeasure(measureName).name;
    const cached = this.fromTable(id, source, measure, k);
    if (cached) return { neighbors: cached, from: 'table' };
    const s = this.searcher(source, measure);
    if (s.isEmpty(id)) return { neighbors: [], from: 'search' };
    const r = s.search(id, k);
    const out: ServedNeighbor[] = [];
    for (let i = 0; i < r.count; i++) out.push({ rank: i + 1, neighbor: this.term(r.ids[i]), score: scoreOf(measure, r.distances[i]), distance: r.distances[i] });
    return { neighbors: out, from: 'search' };
  }

  /** The distance between two terms under a measure, on rows or vectors. */
  distance(a: number, b: number, source: ServedSource, measureName: string): number {
    const measure = getMeasure(measureName);
    const d = this.data(source);
    if (d.kind === 'rows') return measure.sparse(csrRow(d.rows, a), csrRow(d.rows, b), d.rows.nCols);
    return measure.dense(denseRow(d.vectors, a), denseRow(d.vectors, b));
  }

  /** The vector of term `id` (as stored, float32 values). */
  vector(id: number): number[] {
    if (!this.vectors) throw new KindredError(`${this.dir} has no vectors (build it with vectors.enabled true)`);
    // stored as float32: the shortest decimal of each float32 value, not its float64 expansion
    return Array.from(denseRow(this.vectors.vectors, id), (x) => Number(float32Text(x)));
  }
}
