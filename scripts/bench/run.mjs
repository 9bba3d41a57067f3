/**
 * The counting benchmark: kindred build, the numpy/scipy reference pipeline and `wc -w`, side by side on the
 * same file, with wall time, tokens per second and peak resident memory of each process (GNU time -v).
 *
 *   npm run bench                                   Brown ×10 and synthetic 10M tokens
 *   npm run bench -- --sizes 10m,100m               add the 100M-token synthetic corpus
 *   npm run bench -- --sizes 1b --no-reference      the 1B-token corpus (hours of reference time otherwise)
 *   npm run bench -- --corpora wide --sizes 20m --memory 256 --no-reference --no-single
 *                                                   half the tokens random strings: the vocabulary pass's
 *                                                   memory with 10M distinct terms (decision 35)
 *
 * Options: --corpora brown,synthetic[,wide]  --sizes 10m[,100m,1b]  --workers N (0 = CPU count)  --memory MiB
 *          --dir DIR (corpora and outputs; default $TMPDIR/kindred-bench)  --no-reference  --no-single
 *          --reference-max-tokens N (skip the reference above this size; default 150m)
 *          --huge-pages (one more kindred build, all workers, with GLIBC_TUNABLES=glibc.malloc.hugetlb=1:
 *          malloc's memory in transparent huge pages where the kernel gives them on request; README "Speed")
 * Settings: symmetric window 5, harmonic weighting, minimum count 5, PPMI with smoothing 0.75, L2 rows.
 */
import { execFileSync, spawnSync } from 'node:child_process';
import { existsSync, mkdirSync, readFileSync, rmSync, statSync, writeFileSync } from 'node:fs';
import os from 'node:os';
import path from 'node:path';
import { fileURLToPath } from 'node:url';
import { writeBrown, writeSynthetic, writeWide } from './corpus.mjs';

const repoRoot = path.resolve(path.dirname(fileURLToPath(import.meta.url)), '..', '..');
const TIME = '/usr/bin/time';

function parseArgs(argv) {
  const o = { corpora: ['brown', 'synthetic'], sizes: ['10m'], workers: 0, memory: 2048, dir: path.join(os.tmpdir(), 'kindred-bench'),
    reference: true, single: true, hugePages: false, referenceMaxTokens: 150e6 };
  for (let i = 0; i < argv.length; i++) {
    const a = argv[i];
    const next = () => argv[++i];
    if (a === '--corpora') o.corpora = next().split(',');
    else if (a === '--sizes') o.sizes = next().split(',');
    else if (a === '--workers') o.workers = Number(next());
    else if (a === '--memory') o.memory = Number(next());
    else if (a === '--dir') o.dir = path.resolve(next());
    else if (a === '--no-reference') o.reference = false;
    else if (a === '--no-single') o.single = false;
    else if (a === '--huge-pages') o.hugePages = true;
    else if (a === '--reference-max-tokens') o.referenceMaxTokens = tokensOf(next());
    else throw new Error(`unknown option ${a} (see the header of scripts/bench/run.mjs)`);
  }
  for (const c of o.corpora) if (c !== 'brown' && c !== 'synthetic' && c !== 'wide') throw new Error(`unknown corpus ${c}: use brown, synthetic, wide`);
  return o;
}

function tokensOf(size) {
  const m = /^(\d+(?:\.\d+)?)([kmb]?)$/i.exec(size);
  if (!m) throw new Error(`bad size ${size}: use e.g. 10m, 100m, 1b`);
  return Math.round(Number(m[1]) * { '': 1, k: 1e3, m: 1e6, b: 1e9 }[m[2].toLowerCase()]);
}

/** Runs a command under GNU time -v; returns wall seconds, peak RSS in MiB and the exit status. */
function timed(label, cmd, args, env = process.env) {
  process.stderr.write(`bench: ${label}: ${[cmd, ...args].join(' ')}\n`);
  const r = spawnSync(TIME, ['-v', cmd, ...args], { env, encoding: 'utf8', maxBuffer: 1 << 28 });
  const err = r.stderr ?? '';
  const wall = /Elapsed \(wall clock\) time \(h:mm:ss or m:ss\): (?:(\d+):)?(\d+):([\d.]+)/.exec(err);
  const rss = /Maximum resident set size \(kbytes\): (\d+)/.exec(err);
  const seconds = wall ? Number(wall[1] ?? 0) * 3600 + Number(wall[2]) * 60 + Number(wall[3]) : NaN;
  if (r.status !== 0) {
    // the program's own last lines, before GNU time's report
    const own = err.split('\tCommand being timed:')[0].trimEnd().split('\n').slice(-15).join('\n');
    process.stderr.write(`bench: ${label} failed (status ${r.status}):\n${own}\n`);
  }
  return { seconds, rssMiB: rss ? Number(rss[1]) / 1024 : NaN, status: r.status, stdout: r.stdout ?? '' };
}

function machine() {
  const cpu = os.cpus()[0]?.model ?? 'unknown';
  let numpy = 'not found';
  try {
    numpy = execFileSync('python3', ['-c', 'import numpy, scipy, sys; print(sys.version.split()[0], numpy.__version__, scipy.__version__)'], { encoding: 'utf8' }).trim();
  } catch { /* reported as not found */ }
  return {
    cpu, cores: os.availableParallelism(), memoryGiB: Math.round(os.totalmem() / 2 ** 30), node: process.version,
    python_numpy_scipy: numpy, kernel: `${os.type()} ${os.release()}`, loadAverage: os.loadavg().map((x) => x.toFixed(2)).join(' '),
  };
}

function ensureCorpus(o, name) {
  mkdirSync(o.dir, { recursive: true });
  const file = path.join(o.dir, `${name}.txt`);
  if (existsSync(file)) return file;
  process.stderr.write(`bench: writing ${file}\n`);
  if (name === 'brown10') writeBrown(file, 10);
  else if (name.startsWith('wide-')) writeWide(file, tokensOf(name.replace(/^wide-/, '')), 2);
  else writeSynthetic(file, tokensOf(name.replace(/^synthetic-/, '')), 1);
  return file;
}

function configFor(o, file, workers) {
  return {
    input: { paths: [file], format: 'text-lines' },
    vocabulary: { minCount: 5 },
    contexts: { type: 'window', window: 5, direction: 'symmetric', weighting: 'harmonic' },
    weighting: { scheme: 'ppmi', smoothing: 0.75 },
    normalize: 'l2',
    memoryMiB: o.memory,
    workers,
  };
}

/** The environment that asks glibc's malloc for transparent huge pages (--huge-pages). */
function hugePagesEnv() {
  const tunables = [process.env.GLIBC_TUNABLES, 'glibc.malloc.hugetlb=1'].filter(Boolean).join(':');
  return { ...process.env, GLIBC_TUNABLES: tunables };
}

function runKindred(o, name, file, workers, hugePages = false) {
  const cfgFile = path.join(o.dir, `${name}-w${workers}.json`);
  writeFileSync(cfgFile, JSON.stringify(configFor(o, file, workers), null, 2));
  const out = path.join(o.dir, `out-${name}-w${workers}${hugePages ? '-huge' : ''}`);
  for (const p of [out, `${out}.kindred`]) rmSync(p, { recursive: true, force: true });
  const r = timed(`kindred (${workers || 'all'} workers${hugePages ? ', huge pages' : ''})`, process.execPath,
    [path.join(repoRoot, 'dist', 'cli', 'main.js'), 'build', cfgFile, '--out', out], hugePages ? hugePagesEnv() : process.env);
  let manifest = null;
  try {
    manifest = JSON.parse(readFileSync(path.join(out, 'manifest.json'), 'utf8'));
  } catch { /* failed build */ }
  const tokens = manifest?.stages?.find((s) => s.name === 'vocabulary')?.counts?.tokens ?? NaN;
  const stages = Object.fromEntries((manifest?.stages ?? []).map((s) => [s.name, s.seconds]));
  return { ...r, tokens, stages, manifest, out };
}

function runReference(o, name, file, config) {
  const cfgFile = path.join(o.dir, `${name}-resolved.json`);
  writeFileSync(cfgFile, JSON.stringify(config));
  const out = path.join(o.dir, `ref-${name}`);
  rmSync(out, { recursive: true, force: true });
  // OPENBLAS_CORETYPE / OPENBLAS_L2_SIZE slow a current numpy on this machine: unset for the benchmark only
  const env = { ...process.env };
  delete env.OPENBLAS_CORETYPE;
  delete env.OPENBLAS_L2_SIZE;
  return timed('reference (numpy/scipy)', 'python3', [path.join(repoRoot, 'scripts', 'reference', 'pipeline.py'), '--input', file, '--config', cfgFile, '--out', out], env);
}

function fmt(x, digits = 2) {
  return Number.isFinite(x) ? x.toFixed(digits) : '-';
}

function main() {
  const o = parseArgs(process.argv.slice(2));
  const command = `npm run bench -- ${process.argv.slice(2).join(' ')}`.trim();
  const info = machine();
  const names = [];
  if (o.corpora.includes('brown')) names.push('brown10');
  if (o.corpora.includes('synthetic')) for (const s of o.sizes) names.push(`synthetic-${s}`);
  if (o.corpora.includes('wide')) for (const s of o.sizes) names.push(`wide-${s}`);
  const rows = [];
  const results = [];
  for (const name of names) {
    const file = ensureCorpus(o, name);
    const bytes = statSync(file).size;
    const wc = timed('wc -w', 'wc', ['-w', file]);
    const words = Number(wc.stdout.trim().split(/\s+/)[0]);
    const kindred = runKindred(o, name, file, o.workers);
    const single = o.single && os.availableParallelism() > 1 && o.workers !== 1 ? runKindred(o, name, file, 1) : null;
    const huge = o.hugePages ? runKindred(o, name, file, o.workers, true) : null;
    const tokens = kindred.tokens;
    const ref = o.reference && kindred.manifest && tokens <= o.referenceMaxTokens ? runReference(o, name, file, kindred.manifest.config) : null;
    const add = (tool, r) => rows.push({
      corpus: name, tool, seconds: r.seconds, mtokPerS: tokens / r.seconds / 1e6, rssMiB: r.rssMiB, status: r.status,
      vsReference: ref ? r.seconds / ref.seconds : NaN, vsWc: r.seconds / wc.seconds,
    });
    add(`kindred build (workers=${o.workers || os.availableParallelism()})`, kindred);
    if (single) add('kindred build (workers=1)', single);
    if (huge) add(`kindred build (workers=${o.workers || os.availableParallelism()}, glibc.malloc.hugetlb=1)`, huge);
    if (ref) add('numpy/scipy reference', ref);
    add('wc -w', wc);
    results.push({ name, file, bytes, words, tokens, kindredStages: kindred.stages, singleStages: single?.stages ?? null,
      speedup2v1: single ? single.seconds / kindred.seconds : null });
  }
  const lines = [];
  lines.push(`$ ${command}`);
  lines.push(`machine: ${info.cpu}, ${info.cores} cores, ${info.memoryGiB} GiB, ${info.kernel}; node ${info.node}; python/numpy/scipy ${info.python_numpy_scipy}; load average at start ${info.loadAverage}, at end ${os.loadavg().map((x) => x.toFixed(2)).join(' ')}`);
  lines.push(`settings: window 5 symmetric harmonic, minCount 5, PPMI alpha 0.75, L2 rows; memoryMiB ${o.memory}`);
  lines.push('');
  lines.push('| corpus | tokens | tool | wall s | Mtokens/s | peak RSS MiB | time / reference | time / wc -w |');
  lines.push('|---|---:|---|---:|---:|---:|---:|---:|');
  for (const r of rows) {
    const res = results.find((x) => x.name === r.corpus);
    lines.push(`| ${r.corpus} | ${res.tokens} | ${r.tool}${r.status === 0 ? '' : ' (FAILED)'} | ${fmt(r.seconds)} | ${fmt(r.mtokPerS)} | ${fmt(r.rssMiB, 0)} | ${fmt(r.vsReference, 3)} | ${fmt(r.vsWc, 1)} |`);
  }
  lines.push('');
  for (const r of results) {
    lines.push(`${r.name}: ${(r.bytes / 2 ** 20).toFixed(1)} MiB, wc -w ${r.words} words; kindred stages (s) ${JSON.stringify(r.kindredStages)}` +
      (r.speedup2v1 ? `; 1 worker / all workers time ${r.speedup2v1.toFixed(2)}×, 1-worker stages ${JSON.stringify(r.singleStages)}` : ''));
  }
  const text = lines.join('\n');
  console.log(text);
  const stamp = new Date().toISOString().replace(/[:.]/g, '-');
  mkdirSync(o.dir, { recursive: true });
  writeFileSync(path.join(o.dir, `results-${stamp}.md`), text + '\n');
  writeFileSync(path.join(o.dir, `results-${stamp}.json`), JSON.stringify({ command, machine: info, rows, results }, null, 2));
}

main();
