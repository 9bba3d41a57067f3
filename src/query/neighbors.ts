import path from 'node:path';
import { KindredError } from '../errors.js';
import { getMeasure, type SparseVector } from '../measures/index.js';
import { readManifest, resolveBuildDir, type Manifest } from '../store/manifest.js';
import { readShard } from '../store/shards.js';
import { readVocabulary, type Vocabulary } from '../store/vocab-file.js';
import type { RowBlock } from '../weight/types.js';
import { closestTerms } from '../edit-distance.js';
import { normalizeTerm } from '../tokenize/index.js';

export interface Neighbor {
  rank: number;
  neighbor: string;
  distance: number;
}

/** A loaded build: manifest and vocabulary, with a term index. */
export interface LoadedBuild {
  dir: string;
  /** The folder the files are read from: `dir` resolved once, so a build published meanwhile cannot mix in. */
  root: string;
  manifest: Manifest;
  vocab: Vocabulary;
  ids: Map<string, number>;
}

export function loadBuild(dir: string): LoadedBuild {
  const root = resolveBuildDir(dir);
  const manifest = readManifest(root);
  const vocab = readVocabulary(path.join(root, 'vocab.arrow'));
  const ids = new Map<string, number>();
  vocab.terms.forEach((t, i) => ids.set(t, i));
  return { dir, root, manifest, vocab, ids };
}

/** The id of a query term, normalized as the build's tokenizer did; an unknown term suggests the closest ones. */
export function termId(build: LoadedBuild, term: string): number {
  const q = normalizeTerm(term, build.manifest.config.tokenize);
  const id = build.ids.get(q);
  if (id !== undefined) return id;
  const near = closestTerms(q, build.vocab.terms);
  const hint = near.length > 0 ? `; closest vocabulary terms: ${near.join(', ')}` : '; no vocabulary term is close to it';
  throw new KindredError(`term "${term}" is not in the vocabulary of ${build.dir}${hint}`);
}

function rowOf(block: RowBlock, r: number): SparseVector {
  const a = block.indptr[r];
  const b = block.indptr[r + 1];
  return { indices: block.cols.subarray(a, b), values: block.values.subarray(a, b) };
}

function readPart(build: LoadedBuild, index: number): RowBlock {
  const p = build.manifest.parts[index];
  return readShard(path.join(build.root, p.weightedFile), p.firstRow, p.endRow);
}

/** The weighted row of term `id`. */
export function weightedRow(build: LoadedBuild, id: number): SparseVector {
  const index = build.manifest.parts.findIndex((p) => id >= p.firstRow && id < p.endRow);
  if (index < 0) throw new KindredError(`${build.dir}: no part holds row ${id}; the manifest does not match the files`);
  const block = readPart(build, index);
  const row = rowOf(block, id - block.firstRow);
  return { indices: row.indices.slice(), values: row.values.slice() };
}

/**
 * The k nearest terms to `term` under `measureName`, by an exact scan of every weighted row.
 * Ties are broken by id (the more frequent term first), so results are stable.
 */
export function findNeighbors(build: LoadedBuild, term: string, measureName: string, k: number): Neighbor[] {
  const measure = getMeasure(measureName);
  const id = termId(build, term);
  const query = weightedRow(build, id);
  if (query.indices.length === 0) {
    throw new KindredError(`term "${term}" has an empty weighted row (every weight is zero), so it has no neighbours under any measure`);
  }
  const dim = build.manifest.matrix.cols;
  const bestIds = new Int32Array(k).fill(-1);
  const bestDist = new Float64Array(k).fill(Infinity);
  let filled = 0;
  for (let p = 0; p < build.manifest.parts.length; p++) {
    const block = readPart(build, p);
    const nRows = block.indptr.length - 1;
    for (let r = 0; r < nRows; r++) {
      const other = block.firstRow + r;
      if (other === id) continue;
      const d = measure.sparse(query, rowOf(block, r), dim);
      // rows arrive in id order, so a strict comparison keeps the lower id on ties
      if (filled === k && !(d < bestDist[k - 1])) continue;
      let i = filled < k ? filled++ : k - 1;
      while (i > 0 && d < bestDist[i - 1]) {
        bestDist[i] = bestDist[i - 1];
        bestIds[i] = bestIds[i - 1];
        i--;
      }
      bestDist[i] = d;
      bestIds[i] = other;
    }
  }
  const out: Neighbor[] = [];
  for (let i = 0; i < filled; i++) out.push({ rank: i + 1, neighbor: build.vocab.terms[bestIds[i]], distance: bestDist[i] });
  return out;
}
