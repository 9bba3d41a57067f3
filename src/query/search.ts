/**
 * Exact k-nearest-neighbour search under any of kindred's measures, for one query term at a time, over all terms.
 *
 * Two phases per query. (1) A fast kernel computes for every candidate j an approximate key: a monotone function
 * of the distance, accurate to within tolerance/2 (for sparse rows, from sums over the contexts both rows share,
 * gathered through the column index, plus per-row totals; for dense vectors, from dot products). (2) With T the
 * k-th smallest key, every candidate with key ≤ T + tolerance is rescored with the measure itself, and the k
 * best by (distance, id) are returned. No true top-k candidate can be missed (its key is at most T + tolerance),
 * so the result equals a brute-force scan with the measure: same neighbours, same order, same scores to the bit.
 * Only O(terms) memory per query: nothing terms × terms is ever held.
 */
import { getMeasure, KL_SMOOTHING_EPSILON, type Measure, type MeasureName } from '../measures/index.js';
import { csrRow, denseRow, type CscMatrix, type CsrMatrix, type DenseMatrix } from './matrix.js';

/** What a search runs over. */
export type SearchData =
  | { kind: 'rows'; rows: CsrMatrix; columns: CscMatrix }
  | { kind: 'vectors'; vectors: DenseMatrix };

/** The neighbours of one query: ids and distances, best first. */
export interface QueryResult {
  count: number;
  ids: Int32Array;
  distances: Float64Array;
}

/** Fills keys[j] for every row j (the query's own entry is ignored) and says which keys are already exact distances. */
interface KeyKernel {
  /** Returns the tolerance of the keys of this query. */
  fill(query: number, keys: Float64Array): number;
  /**
   * Optional: the keys of `count` consecutive queries at once (query first + b into keys[b·n …]), tolerances into
   * `tol`; lets a dense kernel read each candidate once per block of queries instead of once per query.
   */
  fillBlock?(first: number, count: number, keys: Float64Array, tol: Float64Array): void;
  /** True when keys[j] already equals the measure's distance bit for bit (so phase 2 can skip it). */
  exact(j: number): boolean;
}

const LN2 = Math.LN2;

/** Σ over a row of a per-entry function, row by row. */
function rowStats(m: CsrMatrix, f: (v: number) => number): Float64Array {
  const out = new Float64Array(m.nRows);
  for (let i = 0; i < m.nRows; i++) {
    let s = 0;
    for (let p = m.indptr[i]; p < m.indptr[i + 1]; p++) s += f(m.values[p]);
    out[i] = s;
  }
  return out;
}

function maxOf(a: Float64Array): number {
  let m = 0;
  for (let i = 0; i < a.length; i++) if (a[i] > m) m = a[i];
  return m;
}

/**
 * Sparse kernels: accumulate a per-pair quantity over shared columns through the column index, then finish each
 * key from per-row totals. `positiveOnly` kernels see only entries > 0 on both sides (the measure clips at 0).
 */
class SparseKernel implements KeyKernel {
  private readonly acc: Float64Array;
  private readonly acc2: Float64Array;
  private readonly touched: Uint8Array;
  private readonly touchedList: Int32Array;
  private nTouched = 0;
  private readonly stats: Float64Array[];
  private readonly disjointIsExact: boolean;

  constructor(
    private readonly rows: CsrMatrix,
    private readonly cols: CscMatrix,
    private readonly name: MeasureName,
  ) {
    const n = rows.nRows;
    this.acc = new Float64Array(n);
    this.acc2 = name === 'kl' ? new Float64Array(n) : new Float64Array(0);
    this.touched = new Uint8Array(n);
    this.touchedList = new Int32Array(n);
    // rows sharing no (positive) context get the measure's maximum, which the measure returns exactly as well
    this.disjointIsExact = name === 'cosine' || name === 'jaccard' || name === 'dice' || name === 'overlap';
    this.stats = this.makeStats();
  }

  private makeStats(): Float64Array[] {
    const m = this.rows;
    switch (this.name) {
      case 'cosine':
      case 'euclidean':
        return [rowStats(m, (v) => v * v)];
      case 'manhattan':
        return [rowStats(m, Math.abs)];
      case 'jaccard':
      case 'dice':
      case 'overlap':
      case 'js':
        return [rowStats(m, (v) => (v > 0 ? v : 0))];
      case 'matching':
        return [rowStats(m, (v) => (v > 0 ? 1 : 0))];
      case 'kl': {
        const eps = KL_SMOOTHING_EPSILON;
        const dim = m.nCols;
        const mass = rowStats(m, (v) => (v > 0 ? v : 0));
        const npos = rowStats(m, (v) => (v > 0 ? 1 : 0));
        const negEntropy = new Float64Array(m.nRows);
        const logSum = new Float64Array(m.nRows);
        for (let i = 0; i < m.nRows; i++) {
          const su = mass[i];
          const z = (su > 0 ? 1 : 0) + dim * eps;
          let h = 0, l = 0;
          for (let p = m.indptr[i]; p < m.indptr[i + 1]; p++) {
            const v = m.values[p];
            if (!(v > 0)) continue;
            const pi = (v / su + eps) / z;
            h += pi * Math.log(pi);
            l += Math.log(v / su + eps);
          }
          const p0 = eps / z;
          h += (dim - npos[i]) * p0 * Math.log(p0);
          negEntropy[i] = h;
          logSum[i] = l;
        }
        return [mass, npos, negEntropy, logSum];
      }
    }
  }

  exact(j: number): boolean {
    return this.disjointIsExact && this.touched[j] === 0;
  }

  private reset(): void {
    const { acc, acc2, touched, touchedList } = this;
    for (let t = 0; t < this.nTouched; t++) {
      const j = touchedList[t];
      acc[j] = 0;
      if (acc2.length > 0) acc2[j] = 0;
      touched[j] = 0;
    }
    this.nTouched = 0;
  }

  fill(q: number, keys: Float64Array): number {
    this.reset();
    const { rows, cols, acc, acc2, touched, touchedList } = this;
    const name = this.name;
    const positiveOnly = name !== 'cosine' && name !== 'euclidean' && name !== 'manhattan';
    const mass = this.stats[0];
    const mq = mass[q];
    for (let p = rows.indptr[q]; p < rows.indptr[q + 1]; p++) {
      const a = rows.values[p];
      if (positiveOnly && !(a > 0)) continue;
      const c = rows.cols[p];
      for (let r = cols.indptr[c]; r < cols.indptr[c + 1]; r++) {
        const b = cols.values[r];
        if (positiveOnly && !(b > 0)) continue;
        const j = cols.rows[r];
        if (touched[j] === 0) {
          touched[j] = 1;
          touchedList[this.nTouched++] = j;
        }
        switch (name) {
          case 'cosine':
          case 'euclidean':
            acc[j] += a * b;
            break;
          case 'manhattan':
            acc[j] += Math.abs(a) + Math.abs(b) - Math.abs(a - b);
            break;
          case 'jaccard':
          case 'dice':
          case 'overlap':
            acc[j] += a < b ? a : b;
            break;
          case 'matching':
            acc[j] += 1;
            break;
          case 'js': {
            const pu = a / mq, pv = b / mass[j];
            const m = (pu + pv) / 2;
            // shared dimension's JS term minus what it would add unshared (Lin 1991, "Divergence measures based on the Shannon entropy")
            acc[j] += pu * Math.log(pu / m) + pv * Math.log(pv / m) - (pu + pv) * LN2;
            break;
          }
          case 'kl': {
            const au = a / mq;
            acc[j] += au;
            acc2[j] += au * Math.log(b / mass[j] + KL_SMOOTHING_EPSILON);
            break;
          }
        }
      }
    }
    return this.finish(q, keys);
  }

  /** Turns the accumulated sums into keys for every row; returns the tolerance. */
  private finish(q: number, keys: Float64Array): number {
    const n = this.rows.nRows;
    const { acc, acc2 } = this;
    const s0 = this.stats[0];
    const sq = s0[q];
    switch (this.name) {
      case 'cosine': {
        const nq = Math.sqrt(sq);
        for (let j = 0; j < n; j++) {
          const nj = s0[j];
          // 1 − u·v/(‖u‖‖v‖): Salton & McGill 1983
          keys[j] = nq === 0 || nj === 0 ? 1 : 1 - acc[j] / (nq * Math.sqrt(nj));
        }
        return 1e-9;
      }
      case 'euclidean':
        // squared distance ‖u‖² + ‖v‖² − 2u·v (key = distance², monotone)
        for (let j = 0; j < n; j++) keys[j] = sq + s0[j] - 2 * acc[j];
        return 1e-9 * (sq + maxOf(s0)) + 1e-300;
      case 'manhattan':
        // Σ|u−v| = Σ|u| + Σ|v| − Σ_shared (|u|+|v|−|u−v|)
        for (let j = 0; j < n; j++) keys[j] = sq + s0[j] - acc[j];
        return 1e-9 * (sq + maxOf(s0)) + 1e-300;
      case 'jaccard':
        for (let j = 0; j < n; j++) {
          const sumMax = sq + s0[j] - acc[j];
          keys[j] = sumMax > 0 ? 1 - acc[j] / sumMax : 1;
        }
        return 1e-9;
      case 'dice':
        for (let j = 0; j < n; j++) {
          const both = sq + s0[j];
          keys[j] = both > 0 ? 1 - (2 * acc[j]) / both : 1;
        }
        return 1e-9;
      case 'overlap':
        for (let j = 0; j < n; j++) {
          const smaller = sq < s0[j] ? sq : s0[j];
          keys[j] = smaller > 0 ? 1 - acc[j] / smaller : 1;
        }
        return 1e-9;
      case 'matching': {
        const dim = this.rows.nCols;
        for (let j = 0; j < n; j++) keys[j] = dim === 0 ? 0 : (sq + s0[j] - 2 * acc[j]) / dim;
        return 1e-12;
      }
      case 'js':
        // key = JSD = distance²; 2·JSD = 2 ln 2 + Σ_shared (term − (p+q) ln 2)
        for (let j = 0; j < n; j++) keys[j] = sq === 0 || s0[j] === 0 ? LN2 : (2 * LN2 + acc[j]) / 2;
        return 1e-9;
      case 'kl': {
        const [mass, npos, negEntropy, logSum] = this.stats;
        const eps = KL_SMOOTHING_EPSILON;
        const dim = this.rows.nCols;
        const zu = (mass[q] > 0 ? 1 : 0) + dim * eps;
        const hu = negEntropy[q];
        const logEps = Math.log(eps);
        for (let j = 0; j < n; j++) {
          const zv = (mass[j] > 0 ? 1 : 0) + dim * eps;
          // KL(P‖Q) = Σ p ln p − Σ p ln q, the second sum split into shared and unshared dimensions (Kullback & Leibler 1951)
          const inSupportV = (acc[j] + eps * npos[j]) / zu;
          keys[j] = hu + Math.log(zv) - logEps * (1 - inSupportV) - (acc2[j] + eps * logSum[j]) / zu;
        }
        return 1e-7;
      }
    }
  }
}

/** Dense kernels: cosine and euclidean through dot products; every other measure is evaluated directly (exact keys). */
class DenseKernel implements KeyKernel {
  private readonly unit: Float64Array | null = null;
  private readonly sq: Float64Array;
  private readonly maxSq: number;

  constructor(
    private readonly m: DenseMatrix,
    private readonly measure: Measure,
  ) {
    const { nRows, dim, data } = m;
    this.sq = new Float64Array(nRows);
    for (let i = 0; i < nRows; i++) {
      let s = 0;
      for (let t = i * dim; t < (i + 1) * dim; t++) s += data[t] * data[t];
      this.sq[i] = s;
    }
    this.maxSq = maxOf(this.sq);
    if (measure.name === 'cosine') {
      const unit = new Float64Array(data.length);
      for (let i = 0; i < nRows; i++) {
        const norm = Math.sqrt(this.sq[i]);
        if (norm === 0) continue;
        for (let t = i * dim; t < (i + 1) * dim; t++) unit[t] = data[t] / norm;
      }
      this.unit = unit;
    }
  }

  exact(): boolean {
    return this.measure.name !== 'cosine' && this.measure.name !== 'euclidean';
  }

  /** Queries per block of fillBlock: their rows stay in the first-level cache while every candidate streams past. */
  static readonly BLOCK = 8;

  fillBlock(first: number, count: number, keys: Float64Array, tol: Float64Array): void {
    const name = this.measure.name;
    if (name !== 'cosine' && name !== 'euclidean') {
      for (let b = 0; b < count; b++) tol[b] = this.fill(first + b, keys.subarray(b * this.m.nRows, (b + 1) * this.m.nRows));
      return;
    }
    const { nRows, dim } = this.m;
    const data = name === 'cosine' ? (this.unit as Float64Array) : this.m.data;
    const sq = this.sq;
    // four queries per sweep over a candidate's row: four dot products share each load of the candidate
    for (let b0 = 0; b0 < count; b0 += 4) {
      const nb = Math.min(4, count - b0);
      const q0 = (first + b0) * dim;
      const q1 = (first + b0 + Math.min(1, nb - 1)) * dim;
      const q2 = (first + b0 + Math.min(2, nb - 1)) * dim;
      const q3 = (first + b0 + Math.min(3, nb - 1)) * dim;
      for (let j = 0; j < nRows; j++) {
        const jo = j * dim;
        let d0 = 0, d1 = 0, d2 = 0, d3 = 0;
        for (let t = 0; t < dim; t++) {
          const x = data[jo + t];
          d0 += data[q0 + t] * x;
          d1 += data[q1 + t] * x;
          d2 += data[q2 + t] * x;
          d3 += data[q3 + t] * x;
        }
        const base = b0 * nRows + j;
        const qb = first + b0;
        if (name === 'cosine') {
          const empty = sq[j] === 0;
          keys[base] = empty || sq[qb] === 0 ? 1 : 1 - d0;
          if (nb > 1) keys[base + nRows] = empty || sq[qb + 1] === 0 ? 1 : 1 - d1;
          if (nb > 2) keys[base + 2 * nRows] = empty || sq[qb + 2] === 0 ? 1 : 1 - d2;
          if (nb > 3) keys[base + 3 * nRows] = empty || sq[qb + 3] === 0 ? 1 : 1 - d3;
        } else {
          const sj = sq[j];
          keys[base] = sq[qb] + sj - 2 * d0;
          if (nb > 1) keys[base + nRows] = sq[qb + 1] + sj - 2 * d1;
          if (nb > 2) keys[base + 2 * nRows] = sq[qb + 2] + sj - 2 * d2;
          if (nb > 3) keys[base + 3 * nRows] = sq[qb + 3] + sj - 2 * d3;
        }
      }
    }
    for (let b = 0; b < count; b++) tol[b] = name === 'cosine' ? 1e-9 : 1e-9 * (sq[first + b] + this.maxSq) + 1e-300;
  }

  fill(q: number, keys: Float64Array): number {
    const { nRows, dim } = this.m;
    const name = this.measure.name;
    if (name === 'cosine' || name === 'euclidean') {
      const data = name === 'cosine' ? (this.unit as Float64Array) : this.m.data;
      const qo = q * dim;
      for (let j = 0; j < nRows; j++) {
        const jo = j * dim;
        let d0 = 0, d1 = 0;
        let t = 0;
        for (; t + 1 < dim; t += 2) {
          d0 += data[qo + t] * data[jo + t];
          d1 += data[qo + t + 1] * data[jo + t + 1];
        }
        if (t < dim) d0 += data[qo + t] * data[jo + t];
        const dot = d0 + d1;
        if (name === 'cosine') keys[j] = this.sq[q] === 0 || this.sq[j] === 0 ? 1 : 1 - dot;
        else keys[j] = this.sq[q] + this.sq[j] - 2 * dot;
      }
      return name === 'cosine' ? 1e-9 : 1e-9 * (this.sq[q] + this.maxSq) + 1e-300;
    }
    const u = denseRow(this.m, q);
    for (let j = 0; j < nRows; j++) keys[j] = this.measure.dense(u, denseRow(this.m, j));
    return 0;
  }
}

/** A reusable searcher over one data set and one measure. Not shared between threads: each worker makes its own. */
export class NeighborSearcher {
  readonly measure: Measure;
  private readonly kernel: KeyKernel;
  private readonly keys: Float64Array;
  private heap = new Float64Array(16);
  private blockKeys = new Float64Array(0);
  private candIds = new Int32Array(64);
  private candDist = new Float64Array(64);

  constructor(
    readonly data: SearchData,
    measureName: string,
  ) {
    this.measure = getMeasure(measureName);
    const n = this.size;
    this.keys = new Float64Array(n);
    this.kernel = data.kind === 'rows' ? new SparseKernel(data.rows, data.columns, this.measure.name) : new DenseKernel(data.vectors, this.measure);
  }

  /** Number of terms searched over. */
  get size(): number {
    return this.data.kind === 'rows' ? this.data.rows.nRows : this.data.vectors.nRows;
  }

  /** The measure's distance between terms i and j. */
  distance(i: number, j: number): number {
    const d = this.data;
    if (d.kind === 'rows') return this.measure.sparse(csrRow(d.rows, i), csrRow(d.rows, j), d.rows.nCols);
    return this.measure.dense(denseRow(d.vectors, i), denseRow(d.vectors, j));
  }

  /** True when term i has nothing to compare (an all-zero row or vector). */
  isEmpty(i: number): boolean {
    const d = this.data;
    if (d.kind === 'rows') {
      for (let p = d.rows.indptr[i]; p < d.rows.indptr[i + 1]; p++) if (d.rows.values[p] !== 0) return false;
      return true;
    }
    const v = denseRow(d.vectors, i);
    for (let t = 0; t < v.length; t++) if (v[t] !== 0) return false;
    return true;
  }

  /** The k nearest other terms of `query`, by (distance, id). */
  search(query: number, k: number): QueryResult {
    if (Math.min(k, this.size - 1) <= 0) return { count: 0, ids: new Int32Array(0), distances: new Float64Array(0) };
    const tol = this.kernel.fill(query, this.keys);
    return this.select(query, this.keys, tol, k);
  }

  /** The k nearest terms of each query in [first, end), computed a block at a time where the kernel allows it. */
  searchRange(first: number, end: number, k: number): QueryResult[] {
    const out: QueryResult[] = [];
    const fillBlock = this.kernel.fillBlock?.bind(this.kernel);
    if (!fillBlock || Math.min(k, this.size - 1) <= 0) {
      for (let q = first; q < end; q++) out.push(this.search(q, k));
      return out;
    }
    const n = this.size;
    const block = DenseKernel.BLOCK;
    if (this.blockKeys.length < block * n) this.blockKeys = new Float64Array(block * n);
    const tol = new Float64Array(block);
    for (let q0 = first; q0 < end; q0 += block) {
      const count = Math.min(block, end - q0);
      fillBlock(q0, count, this.blockKeys, tol);
      for (let b = 0; b < count; b++) out.push(this.select(q0 + b, this.blockKeys.subarray(b * n, (b + 1) * n), tol[b], k));
    }
    return out;
  }

  /** Phases 1 and 2 on the keys of one query. */
  private select(query: number, keys: Float64Array, tol: number, k: number): QueryResult {
    const n = this.size;
    const kk = Math.min(k, n - 1);

    // phase 1: T = the kk-th smallest key over j ≠ query, by a bounded max-heap of keys
    if (this.heap.length < kk) this.heap = new Float64Array(kk);
    const heap = this.heap;
    let size = 0;
    for (let j = 0; j < n; j++) {
      if (j === query) continue;
      const key = keys[j];
      if (size < kk) {
        let i = size++;
        while (i > 0) {
          const parent = (i - 1) >> 1;
          if (heap[parent] >= key) break;
          heap[i] = heap[parent];
          i = parent;
        }
        heap[i] = key;
      } else if (key < heap[0]) {
        let i = 0;
        for (;;) {
          const l = 2 * i + 1;
          if (l >= kk) break;
          const r = l + 1;
          const c = r < kk && heap[r] > heap[l] ? r : l;
          if (heap[c] <= key) break;
          heap[i] = heap[c];
          i = c;
        }
        heap[i] = key;
      }
    }
    const limit = heap[0] + tol;

    // phase 2: rescore every candidate within the tolerance with the measure itself
    let nc = 0;
    for (let j = 0; j < n; j++) {
      if (j === query || !(keys[j] <= limit)) continue;
      if (nc === this.candIds.length) {
        const ids = new Int32Array(nc * 2);
        ids.set(this.candIds);
        this.candIds = ids;
        const ds = new Float64Array(nc * 2);
        ds.set(this.candDist);
        this.candDist = ds;
      }
      this.candIds[nc] = j;
      this.candDist[nc] = this.kernel.exact(j) ? keys[j] : this.distance(query, j);
      nc++;
    }
    const order = new Int32Array(nc);
    for (let i = 0; i < nc; i++) order[i] = i;
    const cd = this.candDist, ci = this.candIds;
    order.sort((x, y) => cd[x] - cd[y] || ci[x] - ci[y]);
    const count = Math.min(kk, nc);
    const ids = new Int32Array(count);
    const distances = new Float64Array(count);
    for (let i = 0; i < count; i++) {
      ids[i] = ci[order[i]];
      distances[i] = cd[order[i]];
    }
    return { count, ids, distances };
  }
}
