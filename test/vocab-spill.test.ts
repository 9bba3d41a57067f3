/**
 * The vocabulary pass within its memory: when a thread's term table reaches its limit, its terms are written to
 * a run on disk and the table starts empty (decision 35). Builds whose tables hold a few dozen terms, so that they
 * are written out hundreds of times, also in the middle of documents, must give the same files as builds that
 * never write one (checksums), and a vocabulary whose counts and document frequencies equal those counted here
 * by definition: every token of the documented tokenizer (src/tokenize/index.ts, the reference path), a
 * Set of each document's terms for the document frequency, filtered by minCount and minDocFreq, ordered by count
 * descending and then by code point (Buffer.compare of the UTF-8 bytes).
 */
import { mkdtempSync, readFileSync, rmSync, writeFileSync } from 'node:fs';
import os from 'node:os';
import path from 'node:path';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { runBuild } from '../src/build.js';
import { decodeTerms, foldTermRuns, termTableLimits } from '../src/count/passes.js';
import { MAX_FAN_IN, concatKept, mergeTermRange, termRanges, writeTermRun, type TermRun } from '../src/count/term-runs.js';
import type { Progress } from '../src/progress.js';
import { readVocabulary } from '../src/store/vocab-file.js';
import { createTokenizer } from '../src/tokenize/index.js';
import { validateConfig } from '../src/config/index.js';
import { fileChecksums, loadedConfig } from './helpers/small-build.js';
import { mulberry32 } from './helpers/random.js';

let work: string;

/** Whole numbers in [0, n) from a seeded generator. */
function generator(seed: number): (n: number) => number {
  const next = mulberry32(seed);
  return (n) => Math.floor(next() * n);
}

/** A word of rank r: a few frequent words, a long tail (many met once), some with a non-ASCII letter. */
function word(r: number): string {
  const syllables = ['ka', 'lo', 'mi', 'nu', 'pe', 'ri', 'so', 'tu', 'vé', 'ză'];
  let w = '';
  let x = r + 1;
  while (x > 0) {
    w += syllables[x % 10];
    x = Math.floor(x / 10);
  }
  return w;
}

function documentText(rnd: (n: number) => number, tokens: number): string {
  const out: string[] = [];
  for (let i = 0; i < tokens; i++) {
    // about a third from 20 frequent words, the rest from 3000, so that terms recur across documents
    const r = rnd(3) === 0 ? rnd(20) : rnd(rnd(2) === 0 ? 300 : 3000);
    out.push(rnd(40) === 0 ? word(r).toUpperCase() : word(r));
  }
  return out.join(rnd(5) === 0 ? ', ' : ' ');
}

/** Term counts and document frequencies of documents by definition, filtered and ordered as a vocabulary. */
async function expectedVocabulary(docs: string[], minCount: number, minDocFreq: number, maxSize: number) {
  const cfg = validateConfig({ input: { paths: ['x'] } }, 'test');
  const tokenizer = await createTokenizer(cfg.tokenize, work);
  const counts = new Map<string, number>();
  const docFreqs = new Map<string, number>();
  for (const d of docs) {
    const seen = new Set<string>();
    tokenizer.tokenize(d, (t) => {
      counts.set(t, (counts.get(t) ?? 0) + 1);
      seen.add(t);
    });
    for (const t of seen) docFreqs.set(t, (docFreqs.get(t) ?? 0) + 1);
  }
  const terms = [...counts.keys()].filter((t) => counts.get(t)! >= minCount && docFreqs.get(t)! >= minDocFreq);
  terms.sort((a, b) => counts.get(b)! - counts.get(a)! || Buffer.compare(Buffer.from(a), Buffer.from(b)));
  if (maxSize > 0) terms.length = Math.min(terms.length, maxSize);
  return { terms, counts: terms.map((t) => counts.get(t)!), docFreqs: terms.map((t) => docFreqs.get(t)!), distinct: counts.size };
}

function recorder(): Progress & { summaries: string[] } {
  const summaries: string[] = [];
  return { summaries, start() {}, update() {}, end: (s: string) => void summaries.push(s) };
}

async function build(name: string, raw: Record<string, unknown>, termLimit?: number) {
  const progress = recorder();
  const outDir = path.join(work, name);
  const m = await runBuild(loadedConfig(work, raw), { outDir, progress, termLimit, notify: () => {} });
  return { m, outDir, summaries: progress.summaries.join('\n') };
}

let lineDocs: string[];
let fileDocs: string[];

beforeAll(() => {
  work = mkdtempSync(path.join(os.tmpdir(), 'kindred-spill-'));
  const rnd = generator(7);
  lineDocs = Array.from({ length: 400 }, () => documentText(rnd, rnd(3) === 0 ? 0 : 1 + rnd(60)));
  writeFileSync(path.join(work, 'lines.txt'), lineDocs.join('\n') + '\n');
  // one document per file: a long one, which tables of a few dozen terms fill many times, and two short ones
  fileDocs = [documentText(rnd, 20000), documentText(rnd, 300), documentText(rnd, 50)];
  fileDocs.forEach((d, i) => writeFileSync(path.join(work, `doc${i}.txt`), d));
  // the lines file as text: documents are its lines
  lineDocs = readFileSync(path.join(work, 'lines.txt'), 'utf8').split('\n').slice(0, -1);
});
afterAll(() => rmSync(work, { recursive: true, force: true }));

describe('term tables written to runs', () => {
  const cases: [string, Record<string, unknown>, number, () => string[]][] = [
    ['lines, harmonic windows, 1 thread', { input: { paths: ['lines.txt'], format: 'text-lines' }, vocabulary: { minCount: 3 }, contexts: { window: 4, weighting: 'harmonic' }, workers: 1 }, 16, () => lineDocs],
    ['lines, document contexts, 2 threads, minDocFreq', { input: { paths: ['lines.txt'], format: 'text-lines' }, vocabulary: { minCount: 2, minDocFreq: 3 }, contexts: { type: 'document' }, weighting: { scheme: 'tfidf' }, workers: 2 }, 64, () => lineDocs],
    ['lines, maxSize far below the terms that pass minCount, 2 threads', { input: { paths: ['lines.txt'], format: 'text-lines' }, vocabulary: { minCount: 2, maxSize: 40 }, contexts: { window: 3 }, workers: 2 }, 16, () => lineDocs],
    ['whole files, one long document, 2 threads', { input: { paths: ['doc0.txt', 'doc1.txt', 'doc2.txt'], format: 'text-file' }, vocabulary: { minCount: 2, minDocFreq: 2 }, contexts: { window: 2 }, workers: 2 }, 32, () => fileDocs],
  ];
  for (const [name, raw, limit, docs] of cases) {
    it(`${name}: same files as without runs, vocabulary as counted by definition`, async () => {
      const key = name.replace(/\W+/g, '-');
      const whole = await build(`${key}-whole`, raw);
      const spilled = await build(`${key}-runs`, raw, limit);
      // the runs were written (else this compares two builds of one kind)
      expect(whole.summaries).not.toMatch(/runs/);
      expect(spilled.summaries).toMatch(/term tables written to \d{3,} runs/);
      // more runs than a merge reads at once: folded first (the flags carried over), as a large corpus's are
      expect(spilled.summaries).toMatch(/round 1: \d+ term runs, \d+ of them folded into \d+/);
      expect(fileChecksums(spilled.m)).toEqual(fileChecksums(whole.m));

      const v = (raw.vocabulary ?? {}) as { minCount?: number; minDocFreq?: number; maxSize?: number };
      const want = await expectedVocabulary(docs(), v.minCount ?? 1, v.minDocFreq ?? 1, v.maxSize ?? 0);
      if (v.maxSize) expect(want.terms.length).toBe(v.maxSize);
      const got = readVocabulary(path.join(spilled.outDir, 'vocab.arrow'));
      expect(got.terms).toEqual(want.terms);
      expect([...got.counts]).toEqual(want.counts);
      expect([...got.docFreqs]).toEqual(want.docFreqs);
      expect(spilled.summaries).toContain(`${want.distinct} distinct terms`);
    });
  }
});

describe('token streams of a kept vocabulary', () => {
  it('a count stage rerun on a reused vocabulary reads the text again and gives the files of a fresh build', async () => {
    const raw = { input: { paths: ['lines.txt'], format: 'text-lines' }, vocabulary: { minCount: 3 }, contexts: { window: 4 }, workers: 2 };
    const other = { ...raw, contexts: { window: 2, direction: 'right' } };
    await build('rerun', raw);
    const rerun = await build('rerun', other);
    expect(rerun.m.stages.map((s) => [s.name, s.reused])).toEqual([['fingerprint', false], ['vocabulary', true], ['count', false], ['weight', false]]);
    expect(rerun.summaries).toMatch(/token streams/);
    const fresh = await build('fresh', other);
    expect(fresh.summaries).not.toMatch(/token streams/);
    expect(fileChecksums(rerun.m)).toEqual(fileChecksums(fresh.m));
  });
});

/** Runs of up to `size` random terms of `words` (for the given mappers, in order), and the sums a map keeps of them. */
function makeRuns(name: string, mappers: number[], size: number, words = 20000) {
  const rnd = generator(mappers.length);
  const sums = new Map<string, { count: number; docFreq: number }>();
  const epochs = new Map<number, number>();
  const runs: TermRun[] = mappers.map((mapper, r) => {
    const list = [...new Set(Array.from({ length: size }, () => word(rnd(words))))];
    const bytes = list.map((t) => Buffer.from(t));
    const offsets = new Uint32Array(list.length + 1);
    bytes.forEach((b, i) => (offsets[i + 1] = offsets[i] + b.length));
    const counts = Float64Array.from(list, () => 1 + rnd(3));
    const docFreqs = Uint32Array.from(counts, (c) => 1 + rnd(c));
    list.forEach((t, i) => {
      const e = sums.get(t) ?? { count: 0, docFreq: 0 };
      e.count += counts[i];
      e.docFreq += docFreqs[i];
      sums.set(t, e);
    });
    const file = path.join(work, `${name}-${r}.run`);
    const { bytes: n, index } = writeTermRun(file, { terms: { arena: new Uint8Array(Buffer.concat(bytes)), offsets }, size: list.length, counts, docFreqs, flags: null });
    const epoch = epochs.get(mapper) ?? 0;
    epochs.set(mapper, epoch + 1);
    return { file, mapper, epoch, continuedDoc: -1, openDoc: -1, bytes: n, index };
  });
  return { runs, sums };
}

describe('merging term runs by ranges of terms', () => {
  it('gives, range after range, the sums of a map keyed by the terms (runs of about 11,000 terms, seeks inside them)', () => {
    const { runs, sums } = makeRuns('ranges', [0, 1, 2], 12000, 60000);
    expect(Math.min(...runs.map((r) => r.index.positions.length))).toBeGreaterThan(1);
    const filter = { minCount: 3, minDocFreq: 2, maxSize: 0 };
    const ranges = termRanges(runs, 7);
    expect(ranges.length).toBe(7);
    const merged = concatKept(ranges.map((r) => mergeTermRange(runs, filter, r.lo, r.hi)));
    const want = [...sums].filter(([, e]) => e.count >= 3 && e.docFreq >= 2).sort(([a], [b]) => Buffer.compare(Buffer.from(a), Buffer.from(b)));
    expect(merged.distinct).toBe(sums.size);
    expect(decodeTerms(merged.terms, [...merged.counts.keys()])).toEqual(want.map(([t]) => t));
    expect([...merged.counts]).toEqual(want.map(([, e]) => e.count));
    expect([...merged.docFreqs]).toEqual(want.map(([, e]) => e.docFreq));
  });
});

describe('folding term runs down to what a merge reads at once', () => {
  const cases: [string, number[], number][] = [
    // 3 threads of 30 runs each: 90 runs, 27 of them folded (into one), no more than bring them to 64
    ['3 mappers x 30 runs', [0, 1, 2].flatMap((m) => Array.from({ length: 30 }, () => m)), 27],
    // 70 threads of one run each (more threads than a merge reads): runs of consecutive mappers folded together
    ['70 mappers x 1 run', Array.from({ length: 70 }, (_, m) => m), 7],
  ];
  for (const [name, mappers, foldedRuns] of cases) {
    it(`${name}: ${MAX_FAN_IN} runs after folding, and the same sums`, async () => {
      const { runs, sums } = makeRuns(name.replace(/\W+/g, '-'), mappers, 300);
      const progress = recorder();
      const folded = await foldTermRuns(runs, { baseDir: work, workers: 2 }, progress, work);
      expect(folded.length).toBe(MAX_FAN_IN);
      expect(progress.summaries).toEqual([`round 1: ${runs.length} term runs, ${foldedRuns} of them folded into ${foldedRuns - (runs.length - MAX_FAN_IN)}`]);
      const merged = concatKept(termRanges(folded, 3).map((r) => mergeTermRange(folded, { minCount: 1, minDocFreq: 1, maxSize: 0 }, r.lo, r.hi)));
      const want = [...sums].sort(([a], [b]) => Buffer.compare(Buffer.from(a), Buffer.from(b)));
      expect(decodeTerms(merged.terms, [...merged.counts.keys()])).toEqual(want.map(([t]) => t));
      expect([...merged.counts]).toEqual(want.map(([, e]) => e.count));
      expect([...merged.docFreqs]).toEqual(want.map(([, e]) => e.docFreq));
    });
  }
});

describe('term table limits from the memory budget', () => {
  it('fit each thread\'s share (half of memoryMiB over the threads) at 40 bytes a term', () => {
    for (const [mib, workers] of [[16, 1], [16, 8], [1024, 2], [1200, 2], [4096, 3]]) {
      const { termLimit, arenaLimit } = termTableLimits(mib, workers);
      const share = (mib * 1048576) / 2 / workers;
      expect(Number.isInteger(Math.log2(termLimit)) && Number.isInteger(Math.log2(arenaLimit))).toBe(true);
      expect(40 * termLimit + arenaLimit).toBeLessThanOrEqual(share);
      // not wastefully small: the next power of two of either would not fit
      expect(40 * termLimit * 2 > share * 0.75 || 40 * termLimit * 2 + arenaLimit > share).toBe(true);
      expect(arenaLimit * 2 > share - 40 * termLimit).toBe(true);
    }
    expect(termTableLimits(1024, 2).termLimit).toBe(1 << 22);
  });
});
