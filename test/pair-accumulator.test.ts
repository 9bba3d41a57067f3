/**
 * PairAccumulator against straightforward counting of the same seeded id streams.
 *
 * Two references, both computed here from the stream alone:
 *  - the co-occurrence matrix by its definition ("common practice, no source"): every ordered pair of
 *    in-vocabulary tokens at distance d ≤ k adds the window weight of d (harmonic: 1/d scaled to the integer
 *    lcm(1..k)/d) to cell (token, context), counted into a Map;
 *  - what one hash table spilling a run whenever its distinct entries reach 70% of its capacity holds, event by
 *    event (the accumulator's documented spill point): every spilled run file (read back with RunReader) and the
 *    sorted rows handed over must be exactly that, whatever the accumulator buffers internally.
 * Tiny capacities force dozens of spills and growth of the hash from a quarter of its capacity.
 */
import { describe, it, expect, beforeAll, afterAll } from 'vitest';
import { mkdtempSync, rmSync } from 'node:fs';
import os from 'node:os';
import path from 'node:path';
import { PairAccumulator, type AccumulatorHandover } from '../src/count/pair-accumulator.js';
import { RunReader } from '../src/count/runs.js';
import { KindredError } from '../src/errors.js';
import { mulberry32 } from './helpers/random.js';

type Direction = 'symmetric' | 'left' | 'right';

let work: string;
let fileNo = 0;
const spillFile = (): string => path.join(work, `run-${fileNo++}.bin`);

beforeAll(() => {
  work = mkdtempSync(path.join(os.tmpdir(), 'kindred-acc-'));
});
afterAll(() => rmSync(work, { recursive: true, force: true }));

/** Documents of ids drawn with probability ∝ 1/(rank + 1) over nTerms, a share of them -1 (out of vocabulary). */
function zipfDocuments(seed: number, nDocs: number, maxLength: number, nTerms: number, oov: number): Int32Array[] {
  const rand = mulberry32(seed);
  const cdf = new Float64Array(nTerms);
  let s = 0;
  for (let r = 0; r < nTerms; r++) cdf[r] = s += 1 / (r + 1);
  const docs: Int32Array[] = [];
  for (let d = 0; d < nDocs; d++) {
    const doc = new Int32Array(1 + Math.floor(rand() * maxLength));
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

/** Integer window weights: 1, or lcm(1..k)/d for harmonic 1/d. */
function integerWeights(k: number, harmonic: boolean): Float64Array {
  let lcm = 1;
  const gcd = (a: number, b: number): number => (b === 0 ? a : gcd(b, a % b));
  if (harmonic) for (let d = 2; d <= k; d++) lcm = (lcm * d) / gcd(lcm, d);
  const w = new Float64Array(k + 1);
  for (let d = 1; d <= k; d++) w[d] = harmonic ? lcm / d : 1;
  return w;
}

/** The pairs of in-vocabulary tokens at distance d ≤ k of a document, in reading order: [earlier, later, weight of d]. */
function* windowPairs(doc: Int32Array, k: number, weights: Float64Array): Generator<[number, number, number]> {
  for (let i = 0; i < doc.length; i++) {
    for (let j = i + 1; j <= i + k && j < doc.length; j++) {
      if (doc[i] >= 0 && doc[j] >= 0) yield [doc[i], doc[j], weights[j - i]];
    }
  }
}

/**
 * Feeds one document to both references: each pair adds its weight to (earlier, later) when the later token is
 * a right context and to (later, earlier) when the earlier one is a left context; the one-table model gets the
 * same events, or each unordered pair once for a triangle. Returns the number of ordered events.
 */
function feed(doc: Int32Array, k: number, weights: Float64Array, direction: Direction, nCols: number, reference: Map<number, number>, one: OneTable): number {
  let events = 0;
  for (const [a, b, w] of windowPairs(doc, k, weights)) {
    if (direction !== 'left') {
      events++;
      addTo(reference, cell(a, b, nCols), w);
      if (direction === 'right') one.add(a, b, w);
    }
    if (direction !== 'right') {
      events++;
      addTo(reference, cell(b, a, nCols), w);
      if (direction === 'left') one.add(b, a, w);
    }
    if (direction === 'symmetric') one.add(a, b, w);
  }
  return events;
}

/** Cell key of (row, col) in the reference maps. */
const cell = (row: number, col: number, nCols: number): number => row * nCols + col;

function addTo(m: Map<number, number>, key: number, w: number): void {
  m.set(key, (m.get(key) ?? 0) + w);
}

/** Every cell the accumulator handed over, summed: dense block, sorted rows, spilled runs. */
function handedOver(h: AccumulatorHandover, nCols: number): Map<number, number> {
  const m = new Map<number, number>();
  const D = h.denseSize;
  for (let r = 0; r < D; r++) {
    for (let c = 0; c < D; c++) {
      let v: number;
      if (!h.triangle) v = h.dense[r * D + c];
      else if (r === c) v = 2 * h.dense[(r * (r + 1)) / 2 + r];
      else v = h.dense[r < c ? (c * (c + 1)) / 2 + r : (r * (r + 1)) / 2 + c];
      if (v !== 0) addTo(m, cell(r, c, nCols), v);
    }
  }
  // the band: unordered pairs (lo, hi), lo < bandRows, both orientations
  for (let lo = 0; lo < h.bandRows; lo++) {
    for (let hi = 0; hi < nCols; hi++) {
      const v = h.band[lo * nCols + hi];
      if (v !== 0) {
        addTo(m, cell(lo, hi, nCols), v);
        addTo(m, cell(hi, lo, nCols), v);
      }
    }
  }
  for (const [row, col, v] of rowsOf(h)) addTo(m, cell(row, col, nCols), v);
  for (const run of h.runs) for (const [row, col, v] of readRun(run)) addTo(m, cell(row, col, nCols), v);
  return m;
}

function rowsOf(h: AccumulatorHandover): [number, number, number][] {
  const out: [number, number, number][] = [];
  for (let r = 0; r + 1 < h.rowStart.length; r++) {
    for (let p = h.rowStart[r]; p < h.rowStart[r + 1]; p++) out.push([r, h.cols[p], h.values[p]]);
  }
  return out;
}

function readRun(file: string): [number, number, number][] {
  const out: [number, number, number][] = [];
  for (const r = new RunReader(file, 1000); !r.done; r.advance()) out.push([r.row, r.col, r.value]);
  return out;
}

interface Setup {
  nCols: number;
  denseSize: number;
  bandRows?: number;
  capacity: number;
  triangle: boolean;
}

/**
 * One hash table that spills whenever its distinct entries reach 70% of its capacity, fed event by event:
 * the runs it writes and the entries it holds at the end, as sorted (row, col, value) lists.
 */
class OneTable {
  readonly runs: [number, number, number][][] = [];
  private hash = new Map<number, number>();
  private readonly dense = new Map<number, number>();
  private readonly band = new Map<number, number>();
  private readonly spillAt: number;

  constructor(private readonly s: Setup) {
    this.spillAt = Math.floor(0.7 * s.capacity);
  }

  /** An ordered event (row, col, w); a triangle keeps the unordered pair once. */
  add(row: number, col: number, w: number): void {
    const { denseSize: D, nCols, triangle } = this.s;
    const lo = triangle ? Math.min(row, col) : row;
    const hi = triangle ? Math.max(row, col) : col;
    // dense and band cells are uint32: a sum that would reach 2^32 moves to the hash
    const cells = lo < D && hi < D ? this.dense : triangle && lo < (this.s.bandRows ?? 0) ? this.band : null;
    if (cells !== null) {
      const v = (cells.get(cell(lo, hi, nCols)) ?? 0) + w;
      if (v < 2 ** 32) {
        cells.set(cell(lo, hi, nCols), v);
        return;
      }
      cells.set(cell(lo, hi, nCols), 0);
      w = v;
    }
    const key = cell(lo, hi, nCols);
    const had = this.hash.has(key);
    addTo(this.hash, key, w);
    if (!had && this.hash.size >= this.spillAt) {
      this.runs.push(this.sorted());
      this.hash = new Map();
    }
  }

  get size(): number {
    return this.hash.size;
  }

  /** The hash entries in both orientations (a triangle's diagonal doubled), sorted by (row, col). */
  sorted(): [number, number, number][] {
    const { nCols, triangle } = this.s;
    const out: [number, number, number][] = [];
    for (const [key, v] of this.hash) {
      const row = Math.floor(key / nCols);
      const col = key - row * nCols;
      if (!triangle) out.push([row, col, v]);
      else if (row === col) out.push([row, col, 2 * v]);
      else out.push([row, col, v], [col, row, v]);
    }
    return out.sort((a, b) => a[0] - b[0] || a[1] - b[1]);
  }

  /** What finish() hands over: after any spill the rest is spilled too. */
  finish(): [number, number, number][] {
    if (this.runs.length > 0 && this.hash.size > 0) {
      this.runs.push(this.sorted());
      this.hash = new Map();
    }
    return this.sorted();
  }
}

/** '' when two entry lists are equal, else where they first differ. */
function firstDifference(got: [number, number, number][], want: [number, number, number][]): string {
  for (let i = 0; i < Math.max(got.length, want.length); i++) {
    const g = got[i];
    const w = want[i];
    if (!g || !w || g[0] !== w[0] || g[1] !== w[1] || g[2] !== w[2]) return `entry ${i}: ${String(g)} instead of ${String(w)}`;
  }
  return '';
}

function check(h: AccumulatorHandover, one: OneTable, reference: Map<number, number>, nCols: number): void {
  const rest = one.finish();
  expect(h.runs.length).toBe(one.runs.length);
  for (let i = 0; i < h.runs.length; i++) expect(firstDifference(readRun(h.runs[i]), one.runs[i]), `run ${i}`).toBe('');
  expect(firstDifference(rowsOf(h), rest), 'sorted rows').toBe('');
  const got = handedOver(h, nCols);
  const wrong: string[] = [];
  for (const [key, v] of reference) if (got.get(key) !== v) wrong.push(`cell ${key}: ${got.get(key)} instead of ${v}`);
  expect(wrong.slice(0, 5)).toEqual([]);
  expect(got.size).toBe(reference.size);
}

describe('PairAccumulator against counting by definition (common practice, no source)', () => {
  const cases: { direction: Direction; harmonic: boolean; denseSize: number; capacity: number; bandRows?: number }[] = [
    { direction: 'symmetric', harmonic: true, denseSize: 64, capacity: 1024 },
    { direction: 'symmetric', harmonic: true, denseSize: 64, capacity: 1024, bandRows: 16 },
    { direction: 'symmetric', harmonic: false, denseSize: 8, capacity: 2048, bandRows: 8 },
    { direction: 'symmetric', harmonic: false, denseSize: 0, capacity: 4096 },
    { direction: 'left', harmonic: true, denseSize: 32, capacity: 1024 },
    { direction: 'right', harmonic: false, denseSize: 16, capacity: 2048 },
  ];
  for (const c of cases) {
    it(`${c.direction} window, ${c.harmonic ? 'harmonic' : 'uniform'}, dense ${c.denseSize}, band ${c.bandRows ?? 0}, capacity ${c.capacity}: counts, runs and rows match`, () => {
      const nTerms = 3000;
      const k = 5;
      const triangle = c.direction === 'symmetric';
      const weights = integerWeights(k, c.harmonic);
      const docs = zipfDocuments(11 + c.capacity + c.denseSize, 200, 400, nTerms, 0.05);
      const acc = new PairAccumulator({ nRows: nTerms, nCols: nTerms, denseSize: c.denseSize, triangle, capacity: c.capacity, bandRows: c.bandRows }, spillFile);
      const one = new OneTable({ nCols: nTerms, denseSize: c.denseSize, capacity: c.capacity, triangle, bandRows: c.bandRows });
      const reference = new Map<number, number>();
      let events = 0;
      for (const doc of docs) {
        acc.addWindowed(doc, doc.length, k, weights, c.direction);
        events += feed(doc, k, weights, c.direction, nTerms, reference, one);
      }
      expect(acc.pairs).toBe(events);
      expect(acc.size).toBe(one.size);
      const h = acc.finish();
      expect(h.runs.length).toBeGreaterThan(10);
      check(h, one, reference, nTerms);
    });
  }

  it('document contexts: each in-vocabulary token adds 1 to (term, document), with spills', () => {
    const nTerms = 500;
    const docs = zipfDocuments(5, 400, 300, nTerms, 0.1);
    const capacity = 1024;
    const acc = new PairAccumulator({ nRows: nTerms, nCols: docs.length, denseSize: 0, triangle: false, capacity }, spillFile);
    const one = new OneTable({ nCols: docs.length, denseSize: 0, capacity, triangle: false });
    const reference = new Map<number, number>();
    docs.forEach((doc, d) => {
      acc.addDocument(doc, doc.length, d);
      for (const t of doc) {
        if (t < 0) continue;
        addTo(reference, cell(t, d, docs.length), 1);
        one.add(t, d, 1);
      }
    });
    const h = acc.finish();
    expect(h.runs.length).toBeGreaterThan(10);
    check(h, one, reference, docs.length);
  });

  it('a dense cell whose sum passes 2^32 moves it to the hash and the sums stay exact (window 16, harmonic)', () => {
    // two terms alternating: their pair at odd distances d ≤ 16 adds lcm(1..16)/d = 720720/d many times over
    const k = 16;
    const weights = integerWeights(k, true);
    const doc = Int32Array.from({ length: 20000 }, (_, i) => (i % 7 === 6 ? 2 : i % 2));
    const acc = new PairAccumulator({ nRows: 3, nCols: 3, denseSize: 3, triangle: true, capacity: 1024 }, spillFile);
    const one = new OneTable({ nCols: 3, denseSize: 3, capacity: 1024, triangle: true });
    const reference = new Map<number, number>();
    acc.addWindowed(doc, doc.length, k, weights, 'symmetric');
    feed(doc, k, weights, 'symmetric', 3, reference, one);
    expect(reference.get(cell(0, 1, 3))).toBeGreaterThan(4 * 2 ** 32);
    const h = acc.finish();
    expect(rowsOf(h).length).toBeGreaterThan(0);
    check(h, one, reference, 3);
  });

  it('refuses key spaces past 2^53 cells with a KindredError', () => {
    expect(() => new PairAccumulator({ nRows: 2 ** 27, nCols: 2 ** 27, denseSize: 0, triangle: false, capacity: 1024 }, spillFile)).toThrow(KindredError);
  });
});
