/**
 * The vocabulary's order and the merge of the threads' terms. Byte order is checked against Node's
 * Buffer.compare (a memcmp of the bytes), the merged sums against a Map keyed by the terms' bytes, the decoding
 * against TextDecoder term by term, and the whole vocabulary (count descending, ties by code point) against the
 * numpy/scipy reference build (scripts/reference/pipeline.py, Python's own str ordering) on text whose terms
 * differ in UTF-16 and code point order.
 */
import { mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import os from 'node:os';
import path from 'node:path';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { runBuild } from '../src/build.js';
import { sortByBytes, type TermBytes } from '../src/count/term-table.js';
import { decodeTerms, mergeTermCounts } from '../src/count/passes.js';
import type { VocabularyPartial } from '../src/count/map.js';
import { readVocabulary } from '../src/store/vocab-file.js';
import { pythonAvailable } from './helpers/python.js';
import { readReferenceVocab, runReferencePipeline } from './helpers/reference.js';
import { loadedConfig } from './helpers/small-build.js';

/** xorshift32: deterministic test data. */
function generator(seed: number): (n: number) => number {
  let s = seed >>> 0 || 1;
  return (n) => {
    s ^= s << 13;
    s ^= s >>> 17;
    s ^= s << 5;
    return (s >>> 0) % n;
  };
}

/** Distinct byte strings: short ones over a few bytes (many shared prefixes), some long ones sharing a long prefix. */
function randomTerms(count: number, seed: number): Buffer[] {
  const rnd = generator(seed);
  const alphabet = [0x61, 0x62, 0x63, 0x7a, 0xc3, 0xa9, 0xe6, 0x9d, 0xb1, 0xf0, 0x9d, 0x92, 0x9c, 0x30];
  const seen = new Set<string>();
  const out: Buffer[] = [];
  const long = Buffer.alloc(600, 0x6c);
  while (out.length < count) {
    const len = 1 + rnd(rnd(5) === 0 ? 20 : 6);
    const bytes = Array.from({ length: len }, () => alphabet[rnd(alphabet.length)]);
    const b = rnd(50) === 0 ? Buffer.concat([long, Buffer.from(bytes)]) : Buffer.from(bytes);
    const key = b.toString('hex');
    if (seen.has(key)) continue;
    seen.add(key);
    out.push(b);
  }
  return out;
}

function termBytes(terms: Buffer[]): TermBytes {
  const offsets = new Uint32Array(terms.length + 1);
  for (let i = 0; i < terms.length; i++) offsets[i + 1] = offsets[i] + terms[i].length;
  return { arena: new Uint8Array(Buffer.concat(terms)), offsets };
}

function byteOrder(terms: Buffer[]): number[] {
  return terms.map((_, i) => i).sort((a, b) => Buffer.compare(terms[a], terms[b]));
}

describe('sortByBytes', () => {
  for (const [count, seed] of [[0, 1], [1, 2], [11, 3], [12, 4], [500, 5], [20000, 6], [70000, 7]] as const) {
    it(`orders ${count} terms as Buffer.compare does`, () => {
      const terms = randomTerms(count, seed);
      const ids = new Uint32Array(count);
      for (let i = 0; i < count; i++) ids[i] = i;
      const { arena, offsets } = termBytes(terms);
      sortByBytes(arena, offsets, ids);
      expect(Array.from(ids)).toEqual(byteOrder(terms));
    });
  }

  it('orders 70,000 terms with zero bytes, which pad like a shorter term\'s end, as Buffer.compare does (radix path)', () => {
    const rnd = generator(9);
    const seen = new Set<string>();
    const terms: Buffer[] = [];
    while (terms.length < 70000) {
      const b = Buffer.from(Array.from({ length: 1 + rnd(11) }, () => [0x00, 0x01, 0x61, 0xff][rnd(4)]));
      if (seen.has(b.toString('hex'))) continue;
      seen.add(b.toString('hex'));
      terms.push(b);
    }
    const ids = Uint32Array.from(terms.keys());
    const { arena, offsets } = termBytes(terms);
    sortByBytes(arena, offsets, ids);
    expect(Array.from(ids)).toEqual(byteOrder(terms));
  });

  it('puts a prefix before the terms it starts', () => {
    const terms = ['ab', 'a', 'abc', 'b', 'aa', 'a'.repeat(3000), 'a'.repeat(2999)].map((t) => Buffer.from(t));
    const ids = Uint32Array.from(terms.keys());
    const { arena, offsets } = termBytes(terms);
    sortByBytes(arena, offsets, ids);
    const shown = (t: Buffer): string => (t.length > 10 ? `a×${t.length}` : t.toString());
    expect(Array.from(ids).map((i) => shown(terms[i]))).toEqual(['a', 'aa', 'a×2999', 'a×3000', 'ab', 'abc', 'b']);
  });
});

/** A mapper's partial over some of the terms, with counts and document frequencies from rnd. */
function partialOf(terms: Buffer[], rnd: (n: number) => number): VocabularyPartial {
  const counts = Float64Array.from(terms, () => 1 + rnd(1000));
  const docFreqs = Uint32Array.from(terms, () => 1 + rnd(50));
  const t = termBytes(terms);
  const order = new Uint32Array(terms.length);
  for (let i = 0; i < terms.length; i++) order[i] = i;
  sortByBytes(t.arena, t.offsets, order);
  return { terms: t, order, counts, docFreqs, tokens: counts.reduce((s, c) => s + c, 0), runs: [] };
}

describe('mergeTermCounts', () => {
  for (const mappers of [1, 2, 3, 5]) {
    it(`merges ${mappers} mapper(s)' terms by their bytes`, () => {
      const rnd = generator(40 + mappers);
      const all = randomTerms(3000, 100 + mappers);
      // each mapper holds a random subset of the terms, in a random order of its own
      const partials = Array.from({ length: mappers }, () => {
        const mine = all.filter(() => rnd(3) !== 0);
        for (let i = mine.length - 1; i > 0; i--) {
          const j = rnd(i + 1);
          [mine[i], mine[j]] = [mine[j], mine[i]];
        }
        return partialOf(mine, rnd);
      });
      if (mappers === 2) partials.push(partialOf([], rnd)); // a mapper that read no token
      const expected = new Map<string, { count: number; df: number }>();
      for (const p of partials) {
        for (let i = 0; i < p.counts.length; i++) {
          const key = Buffer.from(p.terms.arena.subarray(p.terms.offsets[i], p.terms.offsets[i + 1])).toString('hex');
          const e = expected.get(key) ?? { count: 0, df: 0 };
          e.count += p.counts[i];
          e.df += p.docFreqs[i];
          expected.set(key, e);
        }
      }
      const merged = mergeTermCounts(partials);
      const keys = [...expected.keys()].sort((a, b) => Buffer.compare(Buffer.from(a, 'hex'), Buffer.from(b, 'hex')));
      const got = Array.from({ length: merged.size }, (_, i) => Buffer.from(merged.terms.arena.subarray(merged.terms.offsets[i], merged.terms.offsets[i + 1])).toString('hex'));
      expect(got).toEqual(keys);
      expect(Array.from(merged.counts)).toEqual(keys.map((k) => expected.get(k)!.count));
      expect(Array.from(merged.docFreqs)).toEqual(keys.map((k) => expected.get(k)!.df));
      expect(merged.tokens).toBe(partials.reduce((s, p) => s + p.tokens, 0));
      for (const [m, p] of partials.entries()) {
        for (let i = 0; i < p.counts.length; i++) {
          const key = Buffer.from(p.terms.arena.subarray(p.terms.offsets[i], p.terms.offsets[i + 1])).toString('hex');
          expect(got[merged.mergedIds[m][i]]).toBe(key);
        }
      }
    });
  }
});

describe('decodeTerms', () => {
  it('gives each term as TextDecoder decodes it alone, ASCII or not', () => {
    for (const words of [['the', 'a', 'kettle', 'x'.repeat(40)], ['the', 'café', '東京', '𝒜lpha', 'ｱ', 'naïve', 'z']]) {
      const terms = words.map((w) => Buffer.from(w, 'utf8'));
      const t = termBytes(terms);
      const ids = [3, 0, 2, 1, ...words.keys()].filter((i) => i < words.length);
      const decoder = new TextDecoder();
      expect(decodeTerms(t, ids)).toEqual(ids.map((i) => decoder.decode(terms[i])));
    }
  });
});

let work: string;
beforeAll(() => {
  work = mkdtempSync(path.join(os.tmpdir(), 'kindred-vocab-order-'));
});
afterAll(() => rmSync(work, { recursive: true, force: true }));

describe.skipIf(!pythonAvailable())('the vocabulary against the numpy/scipy reference build', () => {
  it('orders by count, ties by code point (not UTF-16) order, with 2 threads', async () => {
    // 𝒜 (U+1D49C) comes after ｱ (U+FF71) by code point but before it in UTF-16. Every line holds each word once,
    // so most counts tie; a few words come more often, in lines of their own.
    const words = ['ｱ', '𝒜', 'ｱb', '𝒜b', 'café', 'cafe', 'zebra', 'éclair', 'eclair', '東京', '京都', 'naïve', 'a', 'b', 'x1', 'x2'];
    const rnd = generator(9);
    const files = ['words1.txt', 'words2.txt', 'words3.txt'];
    const texts = files.map((_, f) => {
      const lines: string[] = [];
      for (let d = 0; d < 150; d++) {
        const line = words.slice();
        for (let i = line.length - 1; i > 0; i--) {
          const j = rnd(i + 1);
          [line[i], line[j]] = [line[j], line[i]];
        }
        lines.push(line.join(' '));
        if (d % 10 === f) lines.push(['Zebra', 'a', 'ｱ', '東京'][rnd(4)]);
      }
      return lines.join('\n') + '\n';
    });
    files.forEach((f, i) => writeFileSync(path.join(work, f), texts[i]));
    writeFileSync(path.join(work, 'words-all.txt'), texts.join(''));
    const raw = { input: { paths: files, format: 'text-lines' }, vocabulary: { minCount: 1 }, contexts: { window: 2 }, workers: 2 };
    const loaded = loadedConfig(work, raw);
    const summaries: string[] = [];
    await runBuild(loaded, { outDir: path.join(work, 'kindred'), notify: () => undefined, progress: { start() {}, update() {}, end: (s: string) => void summaries.push(s) } });
    expect(summaries[1]).toContain('(2 threads)');
    const reference = path.join(work, 'reference');
    runReferencePipeline(path.join(work, 'words-all.txt'), loadedConfig(work, { ...raw, input: { paths: ['words-all.txt'], format: 'text-lines' } }).config, reference);
    const terms = readReferenceVocab(reference);
    expect(terms.indexOf('ｱb')).toBeLessThan(terms.indexOf('𝒜b'));
    expect(readVocabulary(path.join(work, 'kindred', 'vocab.arrow')).terms).toEqual(terms);
});
});
