/**
 * Exports of a build's neighbour table and vectors to JSON Lines or CSV (RFC 4180), for pipelines that do not read
 * Arrow. Streams record batch by record batch from the Arrow file (random access through a file handle), and
 * writes with back-pressure, so memory stays at one batch whatever the table's size.
 */
import { promises as fsp } from 'node:fs';
import path from 'node:path';
import type { Writable } from 'node:stream';
import type { RecordBatch } from 'apache-arrow';
import { RecordBatchReader } from '../store/arrow.js';
import { KindredError } from '../errors.js';
import { VECTORS_FILE } from '../reduce/vectors-file.js';
import { readManifest, resolveBuildDir } from '../store/manifest.js';
import { normalizeTerm } from '../tokenize/index.js';
import { NEIGHBORS_FILE } from './neighbors-file.js';

export type ExportTable = 'neighbors' | 'vectors';
export type ExportFormat = 'jsonl' | 'csv';

export interface ExportOptions {
  table: ExportTable;
  format: ExportFormat;
  /** Neighbour tables only: rows whose score is below this are left out (score: higher is closer). */
  minScore?: number;
  /** Only these terms (as the user wrote them; normalized like the build's tokenizer). Neighbour tables filter on `term`. */
  terms?: readonly string[];
  /** Count what would be written, write nothing. */
  dryRun?: boolean;
}

export interface ExportSummary {
  rows: number;
  /** Distinct terms written. */
  terms: number;
  /** Filter terms with no row in the output (not in the vocabulary, not in the table, or every row below --min-score). */
  missingTerms: string[];
}

/** A CSV field per RFC 4180: quoted when it holds a comma, a quote or a line break; quotes doubled. */
export function csvField(s: string): string {
  return /[",\r\n]/.test(s) ? `"${s.replace(/"/g, '""')}"` : s;
}

/** The shortest decimal that reads back as the same float32 (vectors are stored as float32). */
export function float32Text(x: number): string {
  if (!Number.isFinite(x)) return String(x);
  for (let p = 1; p <= 9; p++) {
    const s = x.toPrecision(p);
    if (Math.fround(Number(s)) === x) return String(Number(s));
  }
  return String(x);
}

/** Writes to a stream, waiting when its buffer is full. */
async function write(out: Writable, text: string): Promise<void> {
  if (!out.write(text)) await new Promise<void>((resolve, reject) => {
    const onDrain = (): void => { out.off('error', onError); resolve(); };
    const onError = (e: Error): void => { out.off('drain', onDrain); reject(e); };
    out.once('drain', onDrain);
    out.once('error', onError);
  });
}

async function* batches(file: string): AsyncGenerator<RecordBatch> {
  let handle: fsp.FileHandle;
  try {
    handle = await fsp.open(file, 'r');
  } catch (e) {
    const code = (e as NodeJS.ErrnoException).code;
    throw new KindredError(code === 'ENOENT' ? `${file} does not exist` : `cannot read ${file}: ${code ?? String(e)}`);
  }
  try {
    const reader = await RecordBatchReader.from(handle);
    await reader.open();
    for await (const batch of reader) yield batch;
  } finally {
    await handle.close().catch(() => undefined);
  }
}

/** Streams one table of the build at `dir` to `out`; returns what was (or would be) written. */
export async function exportTable(buildPath: string, opts: ExportOptions, out: Writable): Promise<ExportSummary> {
  const dir = resolveBuildDir(buildPath);
  const manifest = readManifest(dir);
  if (opts.table === 'neighbors' && !manifest.neighbors) throw new KindredError(`${dir} has no neighbour table; build it with neighbors.enabled true`);
  if (opts.table === 'vectors' && !manifest.vectors) throw new KindredError(`${dir} has no vectors; build it with vectors.enabled true`);
  if (opts.minScore !== undefined && opts.table !== 'neighbors') throw new KindredError('--min-score applies to neighbour tables only');

  let filter: Set<string> | null = null;
  const missingTerms: string[] = [];
  if (opts.terms) {
    filter = new Set(opts.terms.map((t) => normalizeTerm(t, manifest.config.tokenize)));
  }
  const file = path.join(dir, opts.table === 'neighbors' ? NEIGHBORS_FILE : VECTORS_FILE);
  const seen = new Set<string>();
  let rows = 0;
  let terms = 0;
  let lastTerm: string | null = null;
  const emit = async (text: string): Promise<void> => {
    if (!opts.dryRun) await write(out, text);
  };

  if (opts.table === 'neighbors') {
    if (opts.format === 'csv') await emit('term,rank,neighbor,score,distance\n');
    const minScore = opts.minScore ?? -Infinity;
    for await (const batch of batches(file)) {
      const term = batch.getChild('term')?.toArray() as string[] | undefined;
      const rank = batch.getChild('rank')?.toArray() as Uint32Array | undefined;
      const neighbor = batch.getChild('neighbor')?.toArray() as string[] | undefined;
      const score = batch.getChild('score')?.toArray() as Float64Array | undefined;
      const distance = batch.getChild('distance')?.toArray() as Float64Array | undefined;
      if (!term || !rank || !neighbor || !score || !distance) throw new KindredError(`${file}: missing one of the columns term, rank, neighbor, score, distance`);
      let chunk = '';
      for (let i = 0; i < batch.numRows; i++) {
        if (filter && !filter.has(term[i])) continue;
        if (!(score[i] >= minScore)) continue;
        if (term[i] !== lastTerm) {
          terms++;
          lastTerm = term[i];
          seen.add(term[i]);
        }
        rows++;
        chunk += opts.format === 'jsonl'
          ? `${JSON.stringify({ term: term[i], rank: rank[i], neighbor: neighbor[i], score: score[i], distance: distance[i] })}\n`
          : `${csvField(term[i])},${rank[i]},${csvField(neighbor[i])},${score[i]},${distance[i]}\n`;
        if (chunk.length > 1 << 16) {
          await emit(chunk);
          chunk = '';
        }
      }
      await emit(chunk);
    }
  } else {
    let headerDone = false;
    for await (const batch of batches(file)) {
      const ids = batch.getChild('id')?.toArray() as Uint32Array | undefined;
      const term = batch.getChild('term')?.toArray() as string[] | undefined;
      const vec = batch.getChild('vector');
      if (!ids || !term || !vec) throw new KindredError(`${file}: missing one of the columns id, term, vector`);
      const dim = (vec.type as { listSize: number }).listSize;
      const child = vec.data[0].children[0];
      const values = (child.values as Float32Array).subarray(child.offset + vec.data[0].offset * dim);
      if (opts.format === 'csv' && !headerDone) {
        await emit(`id,term,${Array.from({ length: dim }, (_, j) => `v${j}`).join(',')}\n`);
      }
      headerDone = true;
      let chunk = '';
      for (let i = 0; i < batch.numRows; i++) {
        if (filter && !filter.has(term[i])) continue;
        rows++;
        terms++;
        seen.add(term[i]);
        const v: string[] = [];
        for (let j = 0; j < dim; j++) v.push(float32Text(values[i * dim + j]));
        chunk += opts.format === 'jsonl' ? `{"id":${ids[i]},"term":${JSON.stringify(term[i])},"vector":[${v.join(',')}]}\n` : `${ids[i]},${csvField(term[i])},${v.join(',')}\n`;
        if (chunk.length > 1 << 16) {
          await emit(chunk);
          chunk = '';
        }
      }
      await emit(chunk);
    }
  }
  if (filter) for (const t of filter) if (!seen.has(t)) missingTerms.push(t);
  return { rows, terms, missingTerms };
}
