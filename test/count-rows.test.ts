/**
 * The count stage's chunks and row tasks (src/count/chunks.ts, src/count/rows-map.ts) against counting the same
 * seeded token streams by definition ("common practice, no source"), computed here from the documents alone:
 *  - window contexts: every ordered pair of in-vocabulary tokens of one document at distance d ≤ k adds the
 *    window weight of d (harmonic: 1/d scaled to the integer lcm(1..k)/d) to cell (token, context), where the
 *    context is on the token's right, its left, or either side; out-of-vocabulary tokens keep their place;
 *  - document contexts: every in-vocabulary token adds 1 to cell (token, its document's corpus-wide index).
 * The streams are written with the vocabulary pass's TokenStreamWriter, in several files numbered by two
 * mappers with their own ids, and counted in one chunk and in chunks far smaller than a document, so windows
 * cross chunk edges, with chunk ids of 2 bytes (a small vocabulary) and of 4, loaded in one slice or in
 * several on worker threads (the compiled modules of dist/: `npm test` builds first); every run must be
 * sorted and the runs together must hold exactly the definition's cells.
 */
import { describe, it, expect, beforeAll, afterAll } from 'vitest';
import { mkdtempSync, rmSync } from 'node:fs';
import os from 'node:os';
import path from 'node:path';
import type { ContextsConfig } from '../src/config/types.js';
import { ChunkMemory, planChunks, streamLengths, type CorpusStreams } from '../src/count/chunks.js';
import { gatherGroup, loadChunk } from '../src/count/passes.js';
import { gatherCapacity, planGroups } from '../src/count/gather.js';
import { withThreadPool } from '../src/exec/pool.js';
import { RowsMapper, orderColumns } from '../src/count/rows-map.js';
import { RunReader } from '../src/count/runs.js';
import { windowWeights } from '../src/count/cooccur.js';
import { DOCUMENT_END, TokenStreamWriter } from '../src/count/token-stream.js';
import { mulberry32 } from './helpers/random.js';

let work: string;

beforeAll(() => {
  work = mkdtempSync(path.join(os.tmpdir(), 'kindred-rows-'));
});
afterAll(() => rmSync(work, { recursive: true, force: true }));

const N_TERMS = 60;

/** Documents of final ids drawn with probability ∝ 1/(rank + 1), a share of them -1 (out of vocabulary). */
function zipfDocuments(seed: number, nDocs: number, maxLength: number, oov: number): Int32Array[] {
  const rand = mulberry32(seed);
  const cdf = new Float64Array(N_TERMS);
  let s = 0;
  for (let r = 0; r < N_TERMS; r++) cdf[r] = s += 1 / (r + 1);
  const docs: Int32Array[] = [];
  for (let d = 0; d < nDocs; d++) {
    // some documents are empty: they still take a document number
    const doc = new Int32Array(Math.floor(rand() * maxLength));
    for (let i = 0; i < doc.length; i++) {
      if (rand() < oov) {
        doc[i] = -1;
        continue;
      }
      const u = rand() * s;
      let r = 0;
      while (cdf[r] < u) r++;
      doc[i] = r;
    }
    docs.push(doc);
  }
  return docs;
}

/**
 * The documents as token streams in `files` files, alternately numbered by two mappers whose local ids are a
 * permutation of the final ids plus local ids of terms outside the vocabulary.
 */
function writeStreams(docs: Int32Array[], files: number, tag: string): CorpusStreams {
  const rand = mulberry32(7);
  const finalIds: Int32Array[] = [];
  const localOf: Int32Array[] = [];
  for (let m = 0; m < 2; m++) {
    const local = Array.from({ length: N_TERMS + 5 }, (_, i) => i);
    for (let i = local.length - 1; i > 0; i--) {
      const j = Math.floor(rand() * (i + 1));
      [local[i], local[j]] = [local[j], local[i]];
    }
    const toFinal = new Int32Array(N_TERMS + 5).fill(-1);
    const ofFinal = new Int32Array(N_TERMS + 1);
    for (let t = 0; t < N_TERMS; t++) {
      toFinal[local[t]] = t;
      ofFinal[t] = local[t];
    }
    ofFinal[N_TERMS] = local[N_TERMS + m]; // the local id of a term outside the vocabulary
    finalIds.push(toFinal);
    localOf.push(ofFinal);
  }
  const refs = [];
  const perFile = Math.ceil(docs.length / files);
  for (let f = 0; f < files; f++) {
    const mapper = f % 2;
    const file = path.join(work, `${tag}-${f}.ids`);
    const w = new TokenStreamWriter(file);
    for (const doc of docs.slice(f * perFile, (f + 1) * perFile)) {
      for (const id of doc) w.push(localOf[mapper][id < 0 ? N_TERMS : id]);
      w.push(DOCUMENT_END);
    }
    w.close();
    refs.push({ file, mapper });
  }
  return { refs, finalIds };
}

/** Cells by definition, keyed "row,col". */
function byDefinition(docs: Int32Array[], ctx: ContextsConfig): Map<string, number> {
  const cells = new Map<string, number>();
  const add = (r: number, c: number, w: number): void => void cells.set(`${r},${c}`, (cells.get(`${r},${c}`) ?? 0) + w);
  const { weights } = windowWeights(ctx);
  docs.forEach((doc, d) => {
    for (let i = 0; i < doc.length; i++) {
      if (doc[i] < 0) continue;
      if (ctx.type === 'document') {
        add(doc[i], d, 1);
        continue;
      }
      for (let j = 0; j < doc.length; j++) {
        const dist = Math.abs(i - j);
        if (j === i || dist > ctx.window || doc[j] < 0) continue;
        if (ctx.direction === 'right' && j < i) continue;
        if (ctx.direction === 'left' && j > i) continue;
        add(doc[i], doc[j], weights[dist]);
      }
    }
  });
  return cells;
}

/** Counts the streams chunk by chunk with row tasks of `rowsPerTask` rows; the cells of all runs, summed. */
async function counted(
  streams: CorpusStreams, ctx: ContextsConfig, chunkTokens: number, rowsPerTask: number, wide: boolean, slices: number, gatherBytes: number,
): Promise<{ cells: Map<string, number>; pairs: number; chunks: number; lone: number }> {
  const lengths = streamLengths(streams);
  const chunks = planChunks(lengths.reduce((s, n) => s + n, 0), chunkTokens);
  const { weights } = windowWeights(ctx);
  const cells = new Map<string, number>();
  let pairs = 0;
  let firstDocument = 0;
  let run = 0;
  let lone = 0;
  for (const { from, to } of chunks) {
    const margin = ctx.type === 'document' ? 0 : ctx.window;
    // one slice per thread (one: in this thread)
    const memory = new ChunkMemory(to - from, margin, N_TERMS, wide, gatherBytes);
    const loaded = await loadChunk(streams, lengths, from, to, margin, memory, firstDocument, slices);
    const { chunk } = loaded;
    expect(chunk.ids instanceof Int32Array).toBe(wide);
    firstDocument += chunk.documentEnds;
    const gathered = memory.gatheredOf(ctx.type === 'document');
    for (const group of planGroups(chunk.rowStart, N_TERMS, gatherCapacity(gathered, ctx))) {
      const layout = await gatherGroup(loaded, group, ctx, gathered, slices);
      if (layout === null) lone++;
      const mapper = new RowsMapper({ chunk, contexts: ctx, weights, nCols: ctx.type === 'document' ? 10_000 : N_TERMS, gathered, group, layout, mirror: null });
      for (let first = group.first; first < group.end; first += rowsPerTask) {
        const endRow = Math.min(group.end, first + rowsPerTask);
        const file = path.join(work, `run-${run++}.bin`);
        const result = await mapper.run({ firstRow: first, endRow, file, progress: 0 }, () => {});
        pairs += result.pairs;
        const reader = new RunReader(file);
        let records = 0;
        let last = -1;
        for (; !reader.done; reader.advance()) {
          records++;
          const key = reader.row * 1e6 + reader.col;
          expect(key).toBeGreaterThan(last); // sorted, no cell twice in a run
          last = key;
          expect(reader.row).toBeGreaterThanOrEqual(first);
          expect(reader.row).toBeLessThan(endRow);
          cells.set(`${reader.row},${reader.col}`, (cells.get(`${reader.row},${reader.col}`) ?? 0) + reader.value);
        }
        expect(records).toBe(result.entries);
      }
    }
  }
  return { cells, pairs, chunks: chunks.length, lone };
}

function sorted(m: Map<string, number>): [string, number][] {
  return [...m.entries()].sort((a, b) => (a[0] < b[0] ? -1 : a[0] > b[0] ? 1 : 0));
}

describe('chunked row counting equals counting by definition', () => {
  const cases: [string, ContextsConfig][] = [
    ['symmetric harmonic window 5', { type: 'window', window: 5, direction: 'symmetric', weighting: 'harmonic' }],
    ['symmetric uniform window 2', { type: 'window', window: 2, direction: 'symmetric', weighting: 'uniform' }],
    ['left uniform window 3', { type: 'window', window: 3, direction: 'left', weighting: 'uniform' }],
    ['right harmonic window 4', { type: 'window', window: 4, direction: 'right', weighting: 'harmonic' }],
    ['document contexts', { type: 'document', window: 5, direction: 'symmetric', weighting: 'uniform' }],
  ];
  for (const [name, ctx] of cases) {
    it(`${name}: one chunk and chunks shorter than a document`, async () => {
      const docs = zipfDocuments(name.length, 120, 40, 0.1);
      const streams = writeStreams(docs, 5, name.replace(/\W+/g, '-'));
      const expected = sorted(byDefinition(docs, ctx));
      const events = [...byDefinition(docs, { ...ctx, weighting: 'uniform' }).values()].reduce((s, v) => s + v, 0);
      expect(expected.length).toBeGreaterThan(300);
      // one chunk loaded and gathered in 3 slices on threads; many chunks in this thread; a gathering buffer
      // that holds every row, a few rows, or a few occurrences (the frequent rows gathered alone, in pieces)
      const cases = [[1e9, N_TERMS, false, 3, 1 << 20], [1e9, 7, true, 3, 96], [1e9, 60, false, 1, 400], [37, 11, false, 1, 1 << 20], [5, 60, true, 1, 96]] as const;
      for (const [chunkTokens, rowsPerTask, wide, slices, gatherBytes] of cases) {
        const got = await withThreadPool(() => counted(streams, ctx, chunkTokens, rowsPerTask, wide, slices, gatherBytes), slices);
        if (chunkTokens < 1e9) expect(got.chunks).toBeGreaterThan(20);
        if (gatherBytes === 96 && chunkTokens === 1e9) expect(got.lone).toBeGreaterThan(0);
        expect(sorted(got.cells)).toEqual(expected);
        expect(got.pairs).toBe(events);
      }
    });
  }

  for (const wide of [false, true]) {
    it(`a chunk holds its own tokens once and counts them by term (${wide ? '4' : '2'}-byte ids)`, async () => {
      const docs = zipfDocuments(3, 30, 20, 0.2);
      const streams = writeStreams(docs, 3, `index-${wide}`);
      const lengths = streamLengths(streams);
      const total = lengths.reduce((s, n) => s + n, 0);
      const { chunk } = await withThreadPool(() => loadChunk(streams, lengths, 50, 170, 4, new ChunkMemory(120, 4, N_TERMS, wide), 0, 2), 2);
      const stream = docs.flatMap((d) => [...d, DOCUMENT_END]);
      expect(total).toBe(stream.length);
      // the tokens either side that windows reach, between as many sentinels as a window reaches; narrow ids code
      // −1 and DOCUMENT_END as 0xFFFE, 0xFFFF
      const code = (id: number): number => (wide || id >= 0 ? id : id === DOCUMENT_END ? 0xffff : 0xfffe);
      const ends = [DOCUMENT_END, DOCUMENT_END, DOCUMENT_END, DOCUMENT_END];
      expect([...chunk.ids]).toEqual([...ends, ...stream.slice(46, 174), ...ends].map(code));
      expect(stream.slice(chunk.ownStart - 4 + 46, chunk.ownEnd - 4 + 46)).toEqual(stream.slice(50, 170));
      // at the corpus's ends too: no window reads past the array
      const last = await withThreadPool(() => loadChunk(streams, lengths, total - 30, total, 4, new ChunkMemory(30, 4, N_TERMS, wide), 0, 2), 2);
      expect([...last.chunk.ids]).toEqual([...ends, ...stream.slice(total - 34), ...ends].map(code));
      const first = await withThreadPool(() => loadChunk(streams, lengths, 0, 30, 4, new ChunkMemory(30, 4, N_TERMS, wide), 0, 2), 2);
      expect([...first.chunk.ids]).toEqual([...ends, ...stream.slice(0, 34), ...ends].map(code));
      const own = stream.slice(50, 170);
      for (let t = 0; t < N_TERMS; t++) expect(chunk.rowStart[t + 1] - chunk.rowStart[t]).toBe(own.filter((id) => id === t).length);
      expect(chunk.documentEnds).toBe(own.filter((id) => id === DOCUMENT_END).length);
    });
  }
});

describe('ordering a row\'s touched columns', () => {
  it('gives the columns in ascending order, as a numeric sort does, through a sort or through the bitmap', () => {
    const rand = mulberry32(7);
    for (const nCols of [100, 48_931, 203_042]) {
      const bits = new Int32Array((nCols + 31) >>> 5);
      const touched = new Uint32Array(nCols);
      for (const n of [1, 31, 511, 512, 513, 2000, Math.min(nCols, 40_000), nCols]) {
        if (n > nCols) continue;
        // n distinct columns in first-touch order, most of them small (frequent terms have small ids)
        const seen = new Set<number>();
        while (seen.size < n) seen.add(rand() < 0.9 ? Math.floor(rand() * Math.min(nCols, 4 * n)) : Math.floor(rand() * nCols));
        const cols = [...seen];
        touched.set(cols);
        const got = [...orderColumns(touched, n, bits)];
        // reference: Array.prototype.sort with a numeric comparator
        expect(got).toEqual(cols.slice().sort((a, b) => a - b));
        expect(bits.every((w) => w === 0)).toBe(true); // left clean for the next row
      }
    }
  });
});
