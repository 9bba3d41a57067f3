#!/usr/bin/env node
/**
 * Sorting a term table's terms by their bytes (src/count/term-table.ts sortByBytes: a radix sort on the first 8
 * bytes, then comparisons where those are equal) against comparisons alone (multikey quicksort), side by side on
 * the same terms: the distinct words of the synthetic corpus's sampler, and random strings of nine letters, in
 * the order a table meets them. Not part of `npm run bench`; run after `npm run build`:
 *   node scripts/bench/sort-terms.mjs
 */
import { sortByBytes, sortByBytesCompared } from '../../dist/count/term-table.js';
import { makeRandom, rankOf, wordOf } from './corpus.mjs';

function termsOf(words) {
  const bytes = words.map((w) => Buffer.from(w, 'latin1'));
  const offsets = new Uint32Array(bytes.length + 1);
  bytes.forEach((b, i) => (offsets[i + 1] = offsets[i] + b.length));
  return { arena: new Uint8Array(Buffer.concat(bytes)), offsets, n: bytes.length };
}

function synthetic(distinct) {
  const random = makeRandom(1);
  const seen = new Set();
  while (seen.size < distinct) seen.add(wordOf(rankOf(random)));
  return [...seen];
}

function randomStrings(distinct) {
  const random = makeRandom(2);
  const seen = new Set();
  while (seen.size < distinct) seen.add(String.fromCharCode(...Array.from({ length: 9 }, () => 97 + Math.floor(random() * 26))));
  return [...seen];
}

console.log('| terms | count | radix + comparisons ms | comparisons alone ms | ratio |');
console.log('|---|---:|---:|---:|---:|');
for (const [name, make] of [['synthetic words', synthetic], ['random 9-letter strings', randomStrings]]) {
  for (const distinct of [50_000, 600_000, 1 << 20]) {
    const { arena, offsets, n } = termsOf(make(distinct));
    const time = (sort) => {
      const ms = [];
      for (let r = 0; r < 5; r++) {
        const ids = new Uint32Array(n);
        for (let i = 0; i < n; i++) ids[i] = i;
        const t = performance.now();
        sort(arena, offsets, ids);
        ms.push(performance.now() - t);
      }
      return ms.sort((a, b) => a - b)[2];
    };
    // medians of 5 each
    const a = time(sortByBytes);
    const b = time(sortByBytesCompared);
    console.log(`| ${name} | ${n} | ${a.toFixed(1)} | ${b.toFixed(1)} | ${(b / a).toFixed(2)} |`);
  }
}
