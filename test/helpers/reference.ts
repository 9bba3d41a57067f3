/**
 * Test helpers around the numpy/scipy reference build (scripts/reference/pipeline.py) and its raw COO files.
 */
import { mkdirSync, readFileSync, writeFileSync } from 'node:fs';
import { endianness } from 'node:os';
import path from 'node:path';
import type { KindredConfig } from '../../src/config/types.js';
import type { RowBlock } from '../../src/weight/types.js';
import { repoRoot, runPython } from './python.js';

/** A matrix as COO triplets sorted by (row, col), as written by the reference build. */
export interface ReferenceCoo {
  rows: Int32Array;
  cols: Int32Array;
  values: Float64Array;
}

/** Sizes the reference build writes to meta.json. */
export interface ReferenceMeta {
  nRows: number;
  nCols: number;
  nDocuments: number;
  nTokens: number;
  countsNnz: number;
  weightedNnz: number;
  seconds: Record<string, number>;
}

/** Reads a reference COO file: little-endian int64 nnz, int32 rows[nnz], int32 cols[nnz], float64 values[nnz]. */
export function readReferenceCoo(file: string): ReferenceCoo {
  const buf = readFileSync(file);
  const nnz = Number(buf.readBigInt64LE(0));
  const expected = 8 + nnz * (4 + 4 + 8);
  if (buf.length !== expected) throw new Error(`${file}: ${buf.length} bytes, expected ${expected} for ${nnz} entries`);
  if (endianness() !== 'LE') throw new Error('readReferenceCoo expects a little-endian machine');
  // Copy into an aligned buffer: int32 arrays start at byte 8, the float64 array at 8 + 8·nnz (both aligned).
  const bytes = new Uint8Array(buf.length);
  bytes.set(buf);
  const rows = new Int32Array(bytes.buffer, 8, nnz);
  const cols = new Int32Array(bytes.buffer, 8 + 4 * nnz, nnz);
  const values = new Float64Array(bytes.buffer, 8 + 8 * nnz, nnz);
  return { rows, cols, values };
}

/**
 * Python lines that read the reference COO file arg['file'] (the format readReferenceCoo reads) into a scipy
 * CSR matrix `a` of shape (arg['nRows'], arg['nCols']); arg comes from JSON on standard input.
 */
export const PY_READ_REFERENCE_COO = `
import json, sys
import numpy as np, scipy.sparse as sp
arg = json.load(sys.stdin)
raw = open(arg['file'], 'rb').read()
nnz = int(np.frombuffer(raw, dtype='<i8', count=1)[0])
rows = np.frombuffer(raw, dtype='<i4', count=nnz, offset=8)
cols = np.frombuffer(raw, dtype='<i4', count=nnz, offset=8 + 4 * nnz)
vals = np.frombuffer(raw, dtype='<f8', count=nnz, offset=8 + 8 * nnz)
a = sp.csr_matrix((vals, (rows, cols)), shape=(arg['nRows'], arg['nCols']))
`;

/** The whole COO matrix as one row block of nRows rows starting at row 0. */
export function cooToRowBlock(coo: ReferenceCoo, nRows: number): RowBlock {
  const nnz = coo.values.length;
  const indptr = new Uint32Array(nRows + 1);
  for (let i = 0; i < nnz; i++) {
    if (i > 0 && (coo.rows[i] < coo.rows[i - 1] || (coo.rows[i] === coo.rows[i - 1] && coo.cols[i] <= coo.cols[i - 1]))) {
      throw new Error(`reference COO not sorted by (row, col) at entry ${i}`);
    }
    indptr[coo.rows[i] + 1]++;
  }
  for (let r = 0; r < nRows; r++) indptr[r + 1] += indptr[r];
  return { firstRow: 0, indptr, cols: Uint32Array.from(coo.cols), values: Float64Array.from(coo.values) };
}

/** Splits a block into consecutive blocks of at most `rowsPerBlock` rows (copies), as shards would hold them. */
export function splitRowBlock(block: RowBlock, rowsPerBlock: number): RowBlock[] {
  const nRows = block.indptr.length - 1;
  const out: RowBlock[] = [];
  for (let start = 0; start < nRows; start += rowsPerBlock) {
    const end = Math.min(nRows, start + rowsPerBlock);
    const base = block.indptr[start];
    const indptr = new Uint32Array(end - start + 1);
    for (let r = start; r <= end; r++) indptr[r - start] = block.indptr[r] - base;
    out.push({
      firstRow: block.firstRow + start,
      indptr,
      cols: block.cols.slice(base, block.indptr[end]),
      values: block.values.slice(base, block.indptr[end]),
    });
  }
  return out;
}

/** Runs scripts/reference/pipeline.py on a text file (one document per line) with a resolved config; returns meta.json. */
export function runReferencePipeline(inputTxt: string, config: KindredConfig, outDir: string): ReferenceMeta {
  mkdirSync(outDir, { recursive: true });
  const configFile = path.join(outDir, 'resolved.json');
  writeFileSync(configFile, JSON.stringify(config, null, 2));
  runPython([path.join(repoRoot, 'scripts', 'reference', 'pipeline.py'), '--input', inputTxt, '--config', configFile, '--out', outDir]);
  return readReferenceMeta(outDir);
}

/** Reads DIR/meta.json of a reference build. */
export function readReferenceMeta(outDir: string): ReferenceMeta {
  return JSON.parse(readFileSync(path.join(outDir, 'meta.json'), 'utf8')) as ReferenceMeta;
}

/** Terms of the reference vocabulary in id order. */
export function readReferenceVocab(outDir: string): string[] {
  const text = readFileSync(path.join(outDir, 'vocab.txt'), 'utf8');
  return text === '' ? [] : text.slice(0, -1).split('\n');
}

/** One line of DIR/vocab-stats.tsv: a term with its total count and document frequency. */
export interface ReferenceTermStats {
  id: number;
  term: string;
  count: number;
  docFreq: number;
}

/** Reads DIR/vocab-stats.tsv (id, term, count, doc_freq) in id order. */
export function readReferenceVocabStats(outDir: string): ReferenceTermStats[] {
  const lines = readFileSync(path.join(outDir, 'vocab-stats.tsv'), 'utf8').split('\n').slice(1);
  return lines
    .filter((l) => l !== '')
    .map((l) => {
      const [id, term, count, docFreq] = l.split('\t');
      return { id: Number(id), term, count: Number(count), docFreq: Number(docFreq) };
    });
}
