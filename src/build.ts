import { promises as fsp, statSync } from 'node:fs';
import path from 'node:path';
import type { LoadedConfig } from './config/index.js';
import { KindredError } from './errors.js';
import { resolveInputs } from './ingest/index.js';
import { emptyIngestStats, type IngestStats } from './ingest/types.js';
import { createTokenizer } from './tokenize/index.js';
import { countTerms, countPairs, tokenStreams, chunkTokensFor, type CountExec, type TermsResult } from './count/passes.js';
import { resolveWorkers, withThreadPool } from './exec/pool.js';
import { partitionRows } from './count/partition.js';
import { weightShards } from './weight/stage.js';
import { partFileName } from './store/shards.js';
import type { FileChecksum } from './store/arrow-sink.js';
import { readVocabulary, writeVocabulary } from './store/vocab-file.js';
import { describeWriteFailure, wrapWriteError } from './store/atomic.js';
import { sha256File, sha256Text } from './store/checksum.js';
import { acquireBuildLock } from './store/lock.js';
import { MARGINALS_FILE, readMarginals, writeMarginals } from './store/marginals-file.js';
import { WorkArea, type KnownChecksums, type StageOutput } from './store/work-area.js';
import { FORMAT_VERSION, readManifest, type FileRecord, type InputFingerprint, type Manifest, type PartRecord, type StageRecord } from './store/manifest.js';
import { silentProgress, type Progress } from './progress.js';
import { canonicalJson } from './config/index.js';
import { TOOL_VERSION } from './version.js';
import type { VectorsRecord } from './reduce/stage.js';
import { VECTORS_FILE } from './reduce/vectors-file.js';
import type { NeighborsRecord } from './query/table-stage.js';
import { NEIGHBORS_FILE } from './query/neighbors-file.js';
import pLimit from 'p-limit';

export interface BuildOptions {
  /** Path the build is published at (a symbolic link, switched only when the new build has fully succeeded). */
  outDir: string;
  progress?: Progress;
  /** Tokens per chunk of the count stage; derived from memoryMiB unless set (tests force many chunks with it). */
  chunkTokens?: number;
  /** Mirror entries a merge thread holds at once; derived from the count stage's memory unless set (tests force many row ranges with it). */
  mirrorEntries?: number;
  /** Most terms of a vocabulary thread's table before it is written to a run; derived from memoryMiB unless set (tests force runs with it). */
  termLimit?: number;
  /** Hears one-line notes (a stale lock taken over, a damaged stage output redone); default: stderr. */
  notify?: (message: string) => void;
}

function stageKey(...parts: unknown[]): string {
  return sha256Text(canonicalJson(parts)).slice(0, 32);
}

const FINGERPRINT_CONCURRENCY = 4;

async function fingerprintInputs(files: string[], progress: Progress): Promise<InputFingerprint[]> {
  const sizes = files.map((f) => statSync(f).size);
  progress.start('fingerprint', sizes.reduce((a, b) => a + b, 0), 'B');
  let done = 0;
  // a few files at once overlaps their reads; results stay in input order
  const limit = pLimit(FINGERPRINT_CONCURRENCY);
  const out: InputFingerprint[] = await Promise.all(
    files.map((file) =>
      limit(async () => {
        const st = statSync(file);
        const sha256 = await sha256File(file, (n) => progress.update((done += n)));
        return { path: file, bytes: st.size, modified: st.mtime.toISOString(), sha256 };
      }),
    ),
  );
  progress.end(`${files.length} input file(s), ${done} bytes hashed`);
  return out;
}

/**
 * One stage of the build: a pure function of its inputs and settings, which `key` hashes. Its output folder is
 * written under the work area's tmp/ and kept (keyed) only when complete, so a rerun reuses it.
 */
interface StageSpec<S> {
  name: string;
  key: string;
  /** Top-level files or folders of the output that go into the published build; the rest stay internal. */
  publish: string[];
  /**
   * Writes the output into `dir` (fresh and empty) and returns a JSON summary, kept in stage.json; files whose
   * checksums it knows from writing them go into `known`, so sealing the stage need not read them back.
   */
  run(dir: string, known: KnownChecksums): Promise<S>;
  /** The stage's counts for the manifest. */
  counts(summary: S): Record<string, number>;
}

/** Runs stages, reusing finished ones, and records them for the manifest. */
class StageRunner {
  readonly records: StageRecord[] = [];
  readonly outputs: StageOutput<unknown>[] = [];

  constructor(
    private readonly area: WorkArea,
    private readonly progress: Progress,
    private readonly notify: (message: string) => void,
  ) {}

  /** A step that is always run (nothing to reuse), timed into the manifest. */
  async always<T>(name: string, key: string, run: () => Promise<T>, counts: (r: T) => Record<string, number>): Promise<T> {
    const t0 = performance.now();
    const r = await run();
    this.records.push({ name, key, seconds: secondsSince(t0), reused: false, counts: counts(r) });
    return r;
  }

  async run<S>(spec: StageSpec<S>): Promise<StageOutput<S>> {
    const t0 = performance.now();
    let found: StageOutput<S> | null | { damaged: string } = null;
    if (await this.area.hasStage(spec.name, spec.key)) {
      this.progress.start(spec.name, 0, 'B checked');
      let checked = 0;
      found = await this.area.findStage<S>(spec.name, spec.key, (n) => this.progress.update((checked += n)));
    }
    let out: StageOutput<S>;
    if (found !== null && !('damaged' in found)) {
      this.progress.end(`reused finished output ${spec.key.slice(0, 12)} (${found.published.length} file(s) checked)`);
      out = found;
    } else {
      if (found !== null) {
        this.notify(`the finished output of stage ${spec.name} (${this.area.stageDir(spec.name, spec.key)}) is damaged: ${found.damaged}; redoing the stage`);
        await this.area.discardStage(spec.name, spec.key);
      }
      const tmp = await this.area.temporaryFolder(`${spec.name}-${spec.key}`);
      const known: KnownChecksums = new Map();
      const summary = await spec.run(tmp, known);
      out = await this.area.commitStage(spec.name, spec.key, tmp, spec.publish, summary, secondsSince(t0), known);
    }
    this.records.push({ name: spec.name, key: spec.key, seconds: secondsSince(t0), reused: out.reused, counts: spec.counts(out.summary) });
    this.outputs.push(out as StageOutput<unknown>);
    return out;
  }
}

function secondsSince(t0: number): number {
  return Number(((performance.now() - t0) / 1000).toFixed(3));
}

const sum = (xs: number[]): number => xs.reduce((a, b) => a + b, 0);

/** The vocabulary pass's result when it ran in this build with token streams (and gave this vocabulary). */
interface VocabularySummary {
  documents: number;
  tokens: number;
  distinctTerms: number;
  vocabulary: number;
  ingest: IngestStats;
}

interface CountSummary {
  pairEvents: number;
  entries: number[];
  chunks: number;
  /** Symmetric windows counted mirrored (passes.ts); absent in stage summaries written before it was. */
  mirrored?: boolean;
}

interface WeightSummary {
  entries: number[];
}

const WRITE_SYSCALLS = new Set(['open', 'write', 'writev', 'close', 'fsync', 'link', 'symlink', 'rename', 'mkdir', 'copyfile', 'unlink', 'rmdir']);

/** A file-system error that escaped a stage becomes a one-line error naming the path. */
function asUserError(e: unknown, fallbackPath: string): unknown {
  if (e instanceof KindredError) return e;
  const err = e as NodeJS.ErrnoException | null;
  if (err && typeof err.code === 'string' && typeof err.syscall === 'string') {
    if (WRITE_SYSCALLS.has(err.syscall)) return wrapWriteError(e, fallbackPath);
    const where = typeof err.path === 'string' ? err.path : fallbackPath;
    return new KindredError(`${where}: ${err.syscall} failed: ${describeWriteFailure(err.code)}`);
  }
  return e;
}

/**
 * Builds the whole matrix: vocabulary, co-occurrence counts, weighted rows, manifest. Each stage's output is
 * kept in `<outDir>.kindred/stages/` under a hash of its inputs and settings, so a rerun after a crash redoes
 * only what is missing; the build is published at opts.outDir (a symbolic link switched atomically) only
 * when complete. A second build into the same outDir is refused while one runs.
 */
export async function runBuild(loaded: LoadedConfig, opts: BuildOptions): Promise<Manifest> {
  const progress = opts.progress ?? silentProgress;
  const notify = opts.notify ?? ((m: string) => void process.stderr.write(`kindred: note: ${m}\n`));
  const outDir = path.resolve(opts.outDir);
  const area = new WorkArea(outDir);
  await area.outputState(); // refuse a bad --out before any work
  await fsp.mkdir(path.dirname(outDir), { recursive: true }).catch((e: NodeJS.ErrnoException) => {
    throw new KindredError(`cannot create the output folder ${path.dirname(outDir)}: ${e.code ?? e.message}`);
  });
  const lock = await acquireBuildLock(area.lockFile, outDir, notify);
  try {
    await area.create();
    await area.clearTemporary();
    await area.create();
    // one set of worker threads serves every pass of the build
    return await withThreadPool(() => buildAndPublish(loaded, opts, area, progress, notify), resolveWorkers(loaded.config.workers));
  } catch (e) {
    throw asUserError(e, area.tmpDir);
  } finally {
    await area.clearTemporary().catch(() => undefined);
    await lock.release().catch(() => undefined);
    await area.removeIfEmpty();
  }
}

async function buildAndPublish(
  loaded: LoadedConfig, opts: BuildOptions, area: WorkArea, progress: Progress, notify: (message: string) => void,
): Promise<Manifest> {
  const cfg = loaded.config;
  const files = await resolveInputs(cfg.input.paths, loaded.baseDir);
  await createTokenizer(cfg.tokenize, loaded.baseDir); // a bad stopword file fails here, before any work
  const exec: CountExec = { baseDir: loaded.baseDir, workers: resolveWorkers(cfg.workers), termLimit: opts.termLimit };
  const stopwordsHash = cfg.tokenize.stopwords === null ? null : await sha256File(path.resolve(loaded.baseDir, cfg.tokenize.stopwords));
  const stages = new StageRunner(area, progress, notify);

  const inputs = await stages.always('fingerprint', stageKey(files), () => fingerprintInputs(files, progress),
    (r) => ({ files: r.length, bytes: sum(r.map((f) => f.bytes)) }));
  const totalBytes = sum(inputs.map((f) => f.bytes));
  // Keys chain: each covers the stage's settings and the key of what it reads; the tool version guards
  // against reusing output written by a different kindred.
  const inputKey = stageKey(inputs.map((f) => [f.path, f.sha256]));
  const vocabKey = stageKey(TOOL_VERSION, inputKey, cfg.input, cfg.tokenize, stopwordsHash, cfg.vocabulary);
  const countKey = stageKey(vocabKey, cfg.contexts, cfg.output.parts);
  const weightKey = stageKey(countKey, cfg.weighting, cfg.normalize, cfg.output.valueType);

  // A vocabulary pass run now also writes token streams (temporary, in the work area's tmp/), so the count
  // stage reads term ids instead of tokenizing the input again; a reused vocabulary leaves none.
  let fresh: TermsResult | null = null;
  const vocabStage = await stages.run<VocabularySummary>({
    name: 'vocabulary',
    key: vocabKey,
    publish: ['vocab.arrow'],
    run: async (dir) => {
      const stats = emptyIngestStats();
      fresh = await countTerms(files, cfg, exec, stats, progress, totalBytes, await area.temporaryFolder('tokens'));
      const { vocab, counter } = fresh;
      if (counter.tokens === 0) {
        throw new KindredError(`the corpus is empty: ${files.length} input file(s) gave ${stats.documents} document(s) and no token (check input.format and input.textField)`);
      }
      if (vocab.terms.length === 0) {
        throw new KindredError(`the vocabulary is empty: no term reaches vocabulary.minCount=${cfg.vocabulary.minCount} and vocabulary.minDocFreq=${cfg.vocabulary.minDocFreq}; lower them`);
      }
      await writeVocabulary(path.join(dir, 'vocab.arrow'), vocab);
      return { documents: stats.documents, tokens: counter.tokens, distinctTerms: counter.size, vocabulary: vocab.terms.length, ingest: stats };
    },
    counts: (s) => ({ documents: s.documents, tokens: s.tokens, distinctTerms: s.distinctTerms, vocabulary: s.vocabulary }),
  });
  // A reused vocabulary is read back from the stage's file; a fresh one is the one just written there.
  const vocab = fresh !== null ? (fresh as TermsResult).vocab : readVocabulary(path.join(vocabStage.dir, 'vocab.arrow'));
  const nCols = cfg.contexts.type === 'document' ? vocabStage.summary.documents : vocab.terms.length;
  const ranges = partitionRows(vocab, cfg.contexts, nCols, cfg.output.parts);

  // weighted shards the count stage wrote along with the counts (in the work area's tmp/), for the weight stage
  let prepared: { dir: string; entries: number[]; checksums: FileChecksum[] } | null = null;
  const countStage = await stages.run<CountSummary>({
    name: 'count',
    key: countKey,
    publish: ['counts'],
    run: async (dir, known) => {
      await fsp.mkdir(path.join(dir, 'counts'));
      // the vocabulary pass of this build left token streams; a reused vocabulary needs them made again
      const streams = fresh !== null ? (fresh as TermsResult).streams
        : await tokenStreams(files, cfg, exec, vocab, progress, totalBytes, await area.temporaryFolder('tokens'));
      const chunkTokens = opts.chunkTokens ?? chunkTokensFor(cfg.memoryMiB);
      // the weight stage runs after a count stage that ran: counting may write its shards on the way
      const weigh = { weighting: cfg.weighting, normalize: cfg.normalize, valueType: cfg.output.valueType, dir: await area.temporaryFolder(`weighted-${weightKey}`) };
      const r = await countPairs(cfg, exec, streams, vocab.terms.length, nCols, ranges, dir, chunkTokens, progress, weigh, opts.mirrorEntries);
      r.checksums?.counts.forEach((c, i) => known.set(path.join(dir, 'counts', partFileName(i)), c));
      if (r.weighted !== null && r.checksums?.weighted) prepared = { dir: weigh.dir, entries: r.weighted, checksums: r.checksums.weighted };
      await fsp.rm(path.join(dir, 'runs'), { recursive: true, force: true });
      // the weight stage needs the marginals; keeping them here lets it run (or rerun) without recounting
      await writeMarginals(path.join(dir, MARGINALS_FILE), r.marginals);
      return { pairEvents: r.pairs, entries: r.entries, chunks: r.chunks, mirrored: r.mirrored };
    },
    counts: (s) => ({ pairEvents: s.pairEvents, entries: sum(s.entries), chunks: s.chunks, mirrored: s.mirrored === true ? 1 : 0 }),
  });
  const marginals = readMarginals(path.join(countStage.dir, MARGINALS_FILE));

  const weightStage = await stages.run<WeightSummary>({
    name: 'weight',
    key: weightKey,
    publish: ['weighted'],
    run: async (dir, known) => {
      if (prepared !== null) {
        const { dir: from, entries, checksums } = prepared as { dir: string; entries: number[]; checksums: FileChecksum[] };
        progress.start('weight', 0, 'parts');
        await fsp.rename(from, path.join(dir, 'weighted'));
        checksums.forEach((c, i) => known.set(path.join(dir, 'weighted', partFileName(i)), c));
        progress.end(`${cfg.weighting.scheme}, ${cfg.normalize} rows, ${sum(entries)} nonzero weights (written with the counts)`);
        return { entries };
      }
      await fsp.mkdir(path.join(dir, 'weighted'));
      // weightShards reads <dir>/counts: lend it the count stage's folder for the duration
      const lent = path.join(dir, 'counts');
      await fsp.symlink(path.join(countStage.dir, 'counts'), lent);
      const { entries, checksums } = await weightShards(cfg, ranges, marginals, dir, progress, exec.workers);
      await fsp.unlink(lent);
      checksums.forEach((c, i) => known.set(path.join(dir, 'weighted', partFileName(i)), c));
      return { entries };
    },
    counts: (s) => ({ entries: sum(s.entries) }),
  });

  // Optional stages go here, after 'weight' (e.g. vectors, neighbour tables). Each is one stages.run({...}):
  //   key:     stageKey(<key of every stage it reads>, <its own config section>),
  //   publish: the top-level files or folders it adds to the build (e.g. ['vectors.arrow']),
  //   run(dir): reads earlier outputs (weightStage.dir, countStage.dir ...) and writes only into dir.
  // Its published files then appear in the build and in manifest.files with no further change here.

  const weightedParts = ranges.map((r, i) => ({
    file: path.join(weightStage.dir, 'weighted', partFileName(i)), firstRow: r.firstRow, endRow: r.endRow, entries: weightStage.summary.entries[i],
  }));
  const vectorsKey = stageKey(weightKey, cfg.vectors);
  const vectorsStage = !cfg.vectors.enabled ? null : await stages.run<VectorsRecord>({
    name: 'vectors',
    key: vectorsKey,
    publish: [VECTORS_FILE],
    // the optional stages' modules are loaded only by builds that ask for them
    run: async (dir) => (await import('./reduce/stage.js')).runVectorsStage(cfg.vectors, { outDir: dir, parts: weightedParts, nRows: vocab.terms.length, nCols, terms: vocab.terms, memoryMiB: cfg.memoryMiB }, progress),
    counts: (s) => ({ rows: s.rows, dimensions: s.dimensions, passes: s.passes }),
  });
  const neighborsStage = !cfg.neighbors.enabled ? null : await stages.run<NeighborsRecord>({
    name: 'neighbors',
    key: stageKey(cfg.neighbors.source === 'vectors' ? vectorsKey : weightKey, cfg.neighbors),
    publish: [NEIGHBORS_FILE],
    run: async (dir) => (await import('./query/table-stage.js')).runNeighborsStage(cfg.neighbors, {
      outDir: dir, terms: vocab.terms, workers: exec.workers,
      rows: { dir: weightStage.dir, parts: weightedParts, nRows: vocab.terms.length, nCols },
      vectorsFile: vectorsStage ? path.join(vectorsStage.dir, VECTORS_FILE) : undefined,
    }, progress),
    counts: (s) => ({ terms: s.queried, rows: s.rows, emptyRows: s.emptyRows }),
  });

  const parts: PartRecord[] = ranges.map((r, i) => ({
    index: i, firstRow: r.firstRow, endRow: r.endRow,
    countsFile: `counts/${partFileName(i)}`, countsEntries: countStage.summary.entries[i],
    weightedFile: `weighted/${partFileName(i)}`, weightedEntries: weightStage.summary.entries[i],
  }));
  const fileRecords: FileRecord[] = stages.outputs.flatMap((s) => s.published).sort((a, b) => (a.path < b.path ? -1 : a.path > b.path ? 1 : 0));
  const manifest: Manifest = {
    format: 'kindred-build',
    formatVersion: FORMAT_VERSION,
    toolVersion: TOOL_VERSION,
    createdAt: new Date().toISOString(),
    configFile: loaded.file,
    configHash: loaded.hash,
    config: cfg,
    inputs,
    ingest: vocabStage.summary.ingest,
    matrix: {
      rows: vocab.terms.length,
      cols: nCols,
      columns: cfg.contexts.type === 'document' ? 'documents' : 'terms',
      countsEntries: sum(countStage.summary.entries),
      weightedEntries: sum(weightStage.summary.entries),
      total: marginals.total,
    },
    stages: stages.records,
    parts,
    files: fileRecords,
    ...(vectorsStage ? { vectors: vectorsStage.summary } : {}),
    ...(neighborsStage ? { neighbors: neighborsStage.summary } : {}),
  };
  const { buildId, previous } = await area.publish(stages.outputs, JSON.stringify(manifest, null, 2) + '\n');

  // Keep the new build and the one it replaced (a reader may still have it open), and their stage outputs.
  const keepStages = new Set(stages.records.map((s) => `${s.name}-${s.key}`));
  if (previous !== null) {
    try {
      for (const s of readManifest(path.join(area.buildsDir, previous)).stages) keepStages.add(`${s.name}-${s.key}`);
    } catch {
      // an unreadable previous build keeps nothing else alive
    }
  }
  await area.collectGarbage(previous === null ? [buildId] : [buildId, previous], keepStages);
  return manifest;
}
