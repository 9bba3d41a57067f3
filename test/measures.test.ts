/**
 * Distance measures (src/measures) checked against outside references:
 * - ml-distance 5 (npm), in this process;
 * - scipy.spatial.distance, scipy.special.rel_entr and scipy.stats.entropy, through one python3 process;
 * - facts of the trade, marked "common practice, no source".
 * Where a reference has no function for a measure, the python script evaluates the published
 * formula in numpy, and the test name says so.
 */
import { describe, expect, it } from 'vitest';
import { distance, similarity } from 'ml-distance';
import { KindredError } from '../src/errors.js';
import {
  getMeasure,
  isMeasureName,
  JS_MAX_DISTANCE,
  KL_SMOOTHING_EPSILON,
  MEASURE_NAMES,
  type Measure,
  type MeasureName,
  type SparseVector,
} from '../src/measures/index.js';
import { pythonAvailable, runPythonJson } from './helpers/python.js';
import { mulberry32 } from './helpers/random.js';

// ---------------------------------------------------------------- seeded data


interface Pair {
  label: string;
  dim: number;
  u: Float64Array;
  v: Float64Array;
  su: SparseVector;
  sv: SparseVector;
}

/** Sparse form of a dense row; with `storedZeros`, some zero entries are stored explicitly. */
function toSparse(x: Float64Array, rand?: () => number): SparseVector {
  const idx: number[] = [];
  for (let i = 0; i < x.length; i++) if (x[i] !== 0 || (rand !== undefined && rand() < 0.3)) idx.push(i);
  return { indices: Uint32Array.from(idx), values: Float64Array.from(idx, (i) => x[i]) };
}

function makePair(label: string, u: Float64Array, v: Float64Array): Pair {
  return { label, dim: u.length, u, v, su: toSparse(u), sv: toSparse(v) };
}

/** A random row: `density` of the entries set, nonnegative or signed (as PMI or t-test rows), at a scale. */
function randomRow(rand: () => number, dim: number, density: number, signed: boolean, scale: number): Float64Array {
  const x = new Float64Array(dim);
  for (let i = 0; i < dim; i++) {
    if (rand() >= density) continue;
    x[i] = signed ? (rand() * 3 - 1) * scale : (0.001 + rand()) * scale;
  }
  return x;
}

function randomPairs(seed: number, count: number): Pair[] {
  const rand = mulberry32(seed);
  const pairs: Pair[] = [];
  for (let k = 0; k < count; k++) {
    const dim = 1 + Math.floor(rand() * 50);
    const density = 0.05 + 0.95 * rand();
    const signed = rand() < 0.3;
    const su = 10 ** (Math.floor(rand() * 7) - 3);
    const sv = 10 ** (Math.floor(rand() * 7) - 3);
    pairs.push(
      makePair(`random #${k} (dim ${dim})`, randomRow(rand, dim, density, signed, su), randomRow(rand, dim, density, signed, sv)),
    );
  }
  return pairs;
}

/** Zero rows, disjoint supports, identical and scaled rows, rows with only negative weights, dim 1. */
function edgePairs(seed: number): Pair[] {
  const rand = mulberry32(seed);
  const pairs: Pair[] = [];
  for (const dim of [1, 2, 7, 30]) {
    const zero = new Float64Array(dim);
    const x = randomRow(rand, dim, 1, false, 1);
    const y = randomRow(rand, dim, 0.6, false, 5);
    const negatives = Float64Array.from(x, (t) => -t);
    pairs.push(makePair(`u zero (dim ${dim})`, zero, x));
    pairs.push(makePair(`v zero (dim ${dim})`, x, zero));
    pairs.push(makePair(`both zero (dim ${dim})`, zero, zero.slice()));
    pairs.push(makePair(`identical (dim ${dim})`, x, x.slice()));
    pairs.push(makePair(`v = 3u (dim ${dim})`, x, Float64Array.from(x, (t) => 3 * t)));
    pairs.push(makePair(`v = u/4 (dim ${dim})`, y, Float64Array.from(y, (t) => t / 4)));
    pairs.push(makePair(`u only negative (dim ${dim})`, negatives, x));
    pairs.push(makePair(`both only negative (dim ${dim})`, negatives, Float64Array.from(y, (t) => -t)));
    if (dim >= 2) {
      const even = Float64Array.from(x, (t, i) => (i % 2 === 0 ? t : 0));
      const odd = Float64Array.from(y, (t, i) => (i % 2 === 1 ? t + 0.5 : 0));
      pairs.push(makePair(`disjoint support (dim ${dim})`, even, odd));
      const signedOdd = Float64Array.from(odd, (t, i) => (i % 4 === 1 ? -t : t));
      pairs.push(makePair(`disjoint support, signed (dim ${dim})`, even, signedOdd));
      const one = new Float64Array(dim);
      one[dim - 1] = 2.5;
      pairs.push(makePair(`single entry in the last dimension (dim ${dim})`, one, x));
    }
  }
  return pairs;
}

const PAIRS: Pair[] = [...randomPairs(20240611, 200), ...edgePairs(7)];

// ---------------------------------------------------------------- helpers

function close(actual: number, expected: number, rel = 1e-9, abs = 1e-12): boolean {
  return Math.abs(actual - expected) <= abs + rel * Math.abs(expected);
}

const clip = (x: Float64Array): Float64Array => Float64Array.from(x, (t) => (t > 0 ? t : 0));
const mass = (x: Float64Array): number => clip(x).reduce((s, t) => s + t, 0);
const squaredNorm = (x: Float64Array): number => x.reduce((s, t) => s + t * t, 0);
const sumOf = (x: Float64Array): number => x.reduce((s, t) => s + t, 0);
const presence = (x: Float64Array): Float64Array => Float64Array.from(x, (t) => (t > 0 ? 1 : 0));

/** The KL smoothing of docs/measures.md, written out independently of src/measures/kl.ts. */
function smoothed(x: Float64Array, eps: number): Float64Array {
  const s = mass(x);
  const dist = Float64Array.from(clip(x), (t) => (s > 0 ? t / s : 0));
  const total = sumOf(dist) + x.length * eps;
  return Float64Array.from(dist, (t) => (t + eps) / total);
}

type Form = 'dense' | 'sparse';
const FORMS: Form[] = ['dense', 'sparse'];

function apply(m: Measure, form: Form, p: Pair): number {
  return form === 'dense' ? m.dense(p.u, p.v) : m.sparse(p.su, p.sv, p.dim);
}

/** The documented value where the formula is 0/0 (an empty row): similarity 0, so the largest distance. */
const EMPTY_ROW_DISTANCE: Partial<Record<MeasureName, number>> = {
  cosine: 1,
  js: JS_MAX_DISTANCE,
  jaccard: 1,
  dice: 1,
  overlap: 1,
};

// ---------------------------------------------------------------- registry

describe('measure registry', () => {
  it('lists the nine measures in command-line order, each under its own name', () => {
    expect(MEASURE_NAMES).toEqual(['euclidean', 'manhattan', 'cosine', 'kl', 'js', 'jaccard', 'dice', 'overlap', 'matching']);
    for (const name of MEASURE_NAMES) {
      expect(isMeasureName(name)).toBe(true);
      const m = getMeasure(name);
      expect(m.name).toBe(name);
      expect(m.description.length).toBeGreaterThan(10);
    }
  });

  it('rejects an unknown name with a KindredError listing the allowed ones', () => {
    expect(isMeasureName('cosinus')).toBe(false);
    expect(isMeasureName('toString')).toBe(false);
    expect(() => getMeasure('cosinus')).toThrow(KindredError);
    expect(() => getMeasure('cosinus')).toThrow(
      'unknown measure "cosinus"; allowed: euclidean, manhattan, cosine, kl, js, jaccard, dice, overlap, matching',
    );
  });
});

// ---------------------------------------------------------------- ml-distance

/** ml-distance's value for a pair; NaN where it divides 0 by 0 (an empty row). */
const ML_DISTANCE: Record<MeasureName, (p: Pair) => number> = {
  euclidean: (p) => distance.euclidean(Array.from(p.u), Array.from(p.v)),
  manhattan: (p) => distance.manhattan(p.u, p.v),
  cosine: (p) => 1 - similarity.cosine(p.u, p.v),
  kl: (p) => distance.kullbackLeibler(smoothed(p.u, KL_SMOOTHING_EPSILON), smoothed(p.v, KL_SMOOTHING_EPSILON)),
  // ml-distance jensenShannon is the divergence on distributions; ours is its square root
  js: (p) => Math.sqrt(Math.max(0, distance.jensenShannon(p.u.map((t) => t / mass(p.u)), p.v.map((t) => t / mass(p.v))))),
  jaccard: (p) => 1 - similarity.ruzicka(clip(p.u), clip(p.v)),
  dice: (p) => distance.czekanowski(clip(p.u), clip(p.v)),
  // ml-distance has no overlap coefficient: Σmin from similarity.intersection, over min(Σu, Σv) (Curran 2004)
  overlap: (p) => 1 - similarity.intersection(clip(p.u), clip(p.v)) / Math.min(mass(p.u), mass(p.v)),
  // Hamming distance on presence = L1 distance between 0/1 vectors, over dim
  matching: (p) => distance.manhattan(presence(p.u), presence(p.v)) / p.dim,
};

/** True when the pair holds a row the measure sees as empty (zero norm, or no positive mass). */
function hasEmptyRow(name: MeasureName, p: Pair): boolean {
  if (name === 'cosine') return squaredNorm(p.u) === 0 || squaredNorm(p.v) === 0;
  if (name === 'jaccard' || name === 'dice') return mass(p.u) === 0 && mass(p.v) === 0;
  return mass(p.u) === 0 || mass(p.v) === 0;
}

describe('measures against ml-distance 5 (npm)', () => {
  const names = MEASURE_NAMES.filter((n) => n !== 'js');
  for (const name of names) {
    it(`${name}: dense and sparse forms equal ml-distance on ${PAIRS.length} seeded pairs`, () => {
      const m = getMeasure(name);
      const failures: string[] = [];
      for (const p of PAIRS) {
        const ref = ML_DISTANCE[name](p);
        for (const form of FORMS) {
          const got = apply(m, form, p);
          if (Number.isNaN(ref)) {
            // ml-distance divides 0 by 0 here; the documented convention applies
            const want = EMPTY_ROW_DISTANCE[name];
            if (!hasEmptyRow(name, p) || want === undefined || got !== want) {
              failures.push(`${form} ${p.label}: ml-distance NaN, got ${got}`);
            }
          } else if (!close(got, ref)) {
            failures.push(`${form} ${p.label}: got ${got}, ml-distance ${ref}`);
          }
        }
      }
      expect(failures).toEqual([]);
    });
  }

  it('js: dense and sparse forms equal sqrt(ml-distance jensenShannon) on strictly positive rows (it gives NaN on zeros)', () => {
    const rand = mulberry32(99);
    const m = getMeasure('js');
    const failures: string[] = [];
    for (let k = 0; k < 100; k++) {
      const dim = 1 + Math.floor(rand() * 50);
      const p = makePair(`positive #${k}`, randomRow(rand, dim, 1, false, 10 ** (k % 5)), randomRow(rand, dim, 1, false, 1));
      const ref = ML_DISTANCE.js(p);
      for (const form of FORMS) {
        const got = apply(m, form, p);
        // compare the divergences: the square root would magnify rounding near zero
        if (!close(got * got, ref * ref)) failures.push(`${form} ${p.label}: got ${got}, ml-distance ${ref}`);
      }
    }
    expect(failures).toEqual([]);
  });
});

// ---------------------------------------------------------------- scipy

interface ScipyRow {
  euclidean: number | null;
  cityblock: number | null;
  cosine: number | null;
  kl_entropy: number | null;
  kl_rel_entr: number | null;
  jensenshannon: number | null;
  jsd_rel_entr: number | null;
  jaccard_numpy: number | null;
  jaccard_from_braycurtis: number | null;
  braycurtis: number | null;
  overlap_numpy: number | null;
  hamming: number | null;
}

/** One python3 process for the whole file. Non-finite results (scipy's 0/0) come back as null. */
const SCIPY_SCRIPT = `
import sys, json, warnings
import numpy as np
from scipy.spatial import distance as D
from scipy.special import rel_entr
from scipy.stats import entropy
warnings.simplefilter('ignore')
np.seterr(all='ignore')
data = json.load(sys.stdin)
eps = data['eps']

def fin(x):
    x = float(x)
    return x if np.isfinite(x) else None

def smooth(x):
    # KL smoothing of docs/measures.md: scale to sum 1, add eps to all n dimensions, renormalise
    s = x.sum()
    dist = x / s if s > 0 else np.zeros_like(x)
    return (dist + eps) / (dist.sum() + x.size * eps)

out = []
for pair in data['pairs']:
    u = np.array(pair['u'], dtype=np.float64)
    v = np.array(pair['v'], dtype=np.float64)
    up, vp = np.maximum(u, 0.0), np.maximum(v, 0.0)
    p, q = smooth(up), smooth(vp)
    pn, qn = up / up.sum(), vp / vp.sum()
    m = (pn + qn) / 2
    bc = D.braycurtis(up, vp)
    out.append({
        'euclidean': fin(D.euclidean(u, v)),
        'cityblock': fin(D.cityblock(u, v)),
        'cosine': fin(D.cosine(u, v)),
        'kl_entropy': fin(entropy(p, q)),
        'kl_rel_entr': fin(rel_entr(p, q).sum()),
        'jensenshannon': fin(D.jensenshannon(up, vp)),
        'jsd_rel_entr': fin((rel_entr(pn, m).sum() + rel_entr(qn, m).sum()) / 2),
        # no weighted Jaccard in scipy: the published formula (Grefenstette 1994) in numpy
        'jaccard_numpy': fin(1 - np.minimum(up, vp).sum() / np.maximum(up, vp).sum()),
        # and from Bray-Curtis (= weighted Dice on nonnegative rows) via J = 2D/(1+D)
        'jaccard_from_braycurtis': fin(2 * bc / (1 + bc)),
        'braycurtis': fin(bc),
        # no overlap coefficient in scipy: the published formula (Curran 2004) in numpy
        'overlap_numpy': fin(1 - np.minimum(up, vp).sum() / min(up.sum(), vp.sum())),
        'hamming': fin(D.hamming(up > 0, vp > 0)),
    })
json.dump(out, sys.stdout)
`;

let scipyRows: ScipyRow[] | undefined;
function scipyReference(): ScipyRow[] {
  scipyRows ??= runPythonJson<ScipyRow[]>(['-c', SCIPY_SCRIPT], {
    eps: KL_SMOOTHING_EPSILON,
    pairs: PAIRS.map((p) => ({ u: Array.from(p.u), v: Array.from(p.v) })),
  });
  return scipyRows;
}

/** Which scipy outputs each measure is checked against, and how the value is read. */
const SCIPY_CHECKS: Record<MeasureName, { key: keyof ScipyRow; source: string; js?: 'distance' | 'divergence' }[]> = {
  euclidean: [{ key: 'euclidean', source: 'scipy.spatial.distance.euclidean' }],
  manhattan: [{ key: 'cityblock', source: 'scipy.spatial.distance.cityblock' }],
  cosine: [{ key: 'cosine', source: 'scipy.spatial.distance.cosine' }],
  kl: [
    { key: 'kl_entropy', source: 'scipy.stats.entropy(p, q) on the numpy-smoothed rows' },
    { key: 'kl_rel_entr', source: 'sum of scipy.special.rel_entr(p, q)' },
  ],
  js: [
    { key: 'jensenshannon', source: 'scipy.spatial.distance.jensenshannon', js: 'distance' },
    { key: 'jsd_rel_entr', source: 'JSD from scipy.special.rel_entr', js: 'divergence' },
  ],
  jaccard: [
    { key: 'jaccard_numpy', source: 'numpy of the published formula (scipy has none)' },
    { key: 'jaccard_from_braycurtis', source: '2D/(1+D) of scipy.spatial.distance.braycurtis' },
  ],
  dice: [{ key: 'braycurtis', source: 'scipy.spatial.distance.braycurtis' }],
  overlap: [{ key: 'overlap_numpy', source: 'numpy of the published formula (scipy has none)' }],
  matching: [{ key: 'hamming', source: 'scipy.spatial.distance.hamming on booleans' }],
};

/**
 * The pair of numbers to compare. JS is compared as divergences (squares of our distance), since the
 * square root magnifies rounding near zero; a rounding-negative divergence counts as 0.
 */
function compared(got: number, ref: number, js?: 'distance' | 'divergence'): [number, number] {
  if (js === 'distance') return [got * got, ref * ref];
  if (js === 'divergence') return [got * got, Math.max(0, ref)];
  return [got, ref];
}

describe('measures against scipy 1.x via python3', () => {
  for (const name of MEASURE_NAMES) {
    const sources = SCIPY_CHECKS[name].map((c) => c.source).join('; ');
    it.skipIf(!pythonAvailable())(`${name}: dense and sparse forms equal ${sources}`, () => {
      const rows = scipyReference();
      const m = getMeasure(name);
      const failures: string[] = [];
      PAIRS.forEach((p, k) => {
        for (const check of SCIPY_CHECKS[name]) {
          const ref = rows[k][check.key];
          for (const form of FORMS) {
            const got = apply(m, form, p);
            if (ref === null) {
              const want = EMPTY_ROW_DISTANCE[name];
              // scipy's jensenshannon takes the square root of a rounding-negative sum on near-equal rows
              const nearEqualJs = name === 'js' && !hasEmptyRow(name, p) && got < 1e-7;
              if (!nearEqualJs && (!hasEmptyRow(name, p) || want === undefined || got !== want)) {
                failures.push(`${form} ${p.label}: ${check.key} is NaN, got ${got}`);
              }
            } else if (!close(...compared(got, ref, check.js))) {
              failures.push(`${form} ${p.label}: got ${got}, ${check.key} ${ref}`);
            }
          }
        }
      });
      expect(failures).toEqual([]);
    });
  }
});

// ---------------------------------------------------------------- facts of the trade

describe('facts of the trade', () => {
  it('cosine distance is unchanged when a vector is scaled by a positive constant (common practice, no source)', () => {
    const rand = mulberry32(31);
    const m = getMeasure('cosine');
    for (let k = 0; k < 100; k++) {
      const dim = 1 + Math.floor(rand() * 50);
      const u = randomRow(rand, dim, 0.5, k % 3 === 0, 1);
      u[Math.floor(rand() * dim)] = 0.75; // never the zero row
      const v = randomRow(rand, dim, 0.5, k % 3 === 0, 1);
      const c = 10 ** (rand() * 6 - 3);
      const cu = u.map((t) => c * t);
      const base = makePair('base', u, v);
      const scaled = makePair('scaled', cu, v);
      for (const form of FORMS) {
        expect(Math.abs(apply(m, form, scaled) - apply(m, form, base))).toBeLessThan(1e-12);
        expect(apply(m, form, makePair('self', u, cu))).toBeLessThan(1e-12);
      }
    }
  });

  it('euclidean distance between L2-normalized rows ranks neighbours exactly as cosine does (common practice, no source)', () => {
    const rand = mulberry32(57);
    const eu = getMeasure('euclidean');
    const co = getMeasure('cosine');
    for (const signed of [false, true]) {
      const dim = 25;
      const rows: Float64Array[] = [];
      for (let r = 0; r < 40; r++) {
        const x = randomRow(rand, dim, 0.3, signed, 1);
        x[Math.floor(rand() * dim)] = 1.5; // the fact holds for nonzero rows only
        const norm = Math.sqrt(squaredNorm(x));
        rows.push(x.map((t) => t / norm));
      }
      for (const form of FORMS) {
        for (let q = 0; q < rows.length; q++) {
          const scored = rows
            .map((x, r) => {
              const p = makePair(`${q}-${r}`, rows[q], x);
              return { r, e: apply(eu, form, p), c: apply(co, form, p) };
            })
            .filter((s) => s.r !== q);
          const byEuclidean = [...scored].sort((a, b) => a.e - b.e || a.r - b.r);
          const byCosine = [...scored].sort((a, b) => a.c - b.c || a.r - b.r);
          // same order; neighbours whose scores tie (orthogonal rows: cosine exactly 1) may swap by rounding
          for (let k = 1; k < byEuclidean.length; k++) {
            expect(byEuclidean[k].c).toBeGreaterThanOrEqual(byEuclidean[k - 1].c - 1e-12);
            expect(byCosine[k].e).toBeGreaterThanOrEqual(byCosine[k - 1].e - 1e-12);
          }
        }
      }
    }
  });
});

// ---------------------------------------------------------------- sparse form, conventions

describe('sparse form and documented conventions', () => {
  it('sparse() equals dense() on the densified vectors for every measure, stored zeros included (definition of the sparse form)', () => {
    const rand = mulberry32(5);
    const failures: string[] = [];
    for (const name of MEASURE_NAMES) {
      const m = getMeasure(name);
      for (const p of PAIRS) {
        const dense = m.dense(p.u, p.v);
        const withStoredZeros = m.sparse(toSparse(p.u, rand), toSparse(p.v, rand), p.dim);
        for (const sparse of [m.sparse(p.su, p.sv, p.dim), withStoredZeros]) {
          if (!close(sparse, dense, 1e-12, 1e-15)) failures.push(`${name} ${p.label}: sparse ${sparse}, dense ${dense}`);
        }
      }
    }
    expect(failures).toEqual([]);
  });

  it('values are never NaN and stay in the documented ranges (docs/measures.md)', () => {
    const upper: Record<MeasureName, number> = {
      euclidean: Infinity,
      manhattan: Infinity,
      cosine: 2,
      kl: Infinity,
      js: JS_MAX_DISTANCE + 1e-12,
      jaccard: 1,
      dice: 1,
      overlap: 1,
      matching: 1,
    };
    for (const name of MEASURE_NAMES) {
      const m = getMeasure(name);
      for (const p of PAIRS) {
        for (const form of FORMS) {
          const d = apply(m, form, p);
          expect(Number.isFinite(d), `${name} ${form} ${p.label}`).toBe(true);
          expect(d).toBeGreaterThanOrEqual(0);
          expect(d).toBeLessThanOrEqual(upper[name]);
        }
      }
    }
  });

  it('zero rows follow the documented conventions where scipy returns NaN', () => {
    const zero = new Float64Array(4);
    const x = Float64Array.from([0, 2, 0.5, 1]);
    const both = makePair('both zero', zero, zero.slice());
    const one = makePair('u zero', zero, x);
    for (const form of FORMS) {
      expect(apply(getMeasure('cosine'), form, one)).toBe(1);
      expect(apply(getMeasure('cosine'), form, both)).toBe(1);
      expect(apply(getMeasure('js'), form, one)).toBe(Math.sqrt(Math.LN2));
      expect(apply(getMeasure('js'), form, both)).toBe(Math.sqrt(Math.LN2));
      expect(apply(getMeasure('jaccard'), form, both)).toBe(1);
      expect(apply(getMeasure('dice'), form, both)).toBe(1);
      expect(apply(getMeasure('overlap'), form, one)).toBe(1);
      // geometric measures need no convention
      expect(apply(getMeasure('euclidean'), form, both)).toBe(0);
      expect(apply(getMeasure('matching'), form, both)).toBe(0);
      // the smoothing turns a zero row into the uniform distribution
      expect(apply(getMeasure('kl'), form, both)).toBe(0);
    }
  });

  it('dense() rejects vectors of different lengths (a caller bug, so a RangeError)', () => {
    for (const name of MEASURE_NAMES) {
      expect(() => getMeasure(name).dense(new Float64Array(3), new Float64Array(4))).toThrow(RangeError);
    }
  });
});
