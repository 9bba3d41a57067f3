import { promises as fsp, statSync } from 'node:fs';
import path from 'node:path';
import type { LoadedConfig } from './config/index.js';
import { KindredError } from './errors.js';
import { resolveInputs } from './ingest/index.js';
import { emptyIngestStats } from './ingest/types.js';
import { createTokenizer } from './tokenize/index.js';
import { pairTableCapacity } from './count/cooccur.js';
import { countTerms, countPairs } from './count/passes.js';
import { partitionRows } from './count/partition.js';
import { weightShards } from './weight/stage.js';
import { partFileName } from './store/shards.js';
import { writeVocabulary } from './store/vocab-file.js';
import { publishDirectory, temporarySibling, writeFileAtomic } from './store/atomic.js';
import { sha256File, sha256Text } from './store/checksum.js';
import { FORMAT_VERSION, MANIFEST_FILE, type FileRecord, type InputFingerprint, type Manifest, type PartRecord, type StageRecord } from './store/manifest.js';
import { silentProgress, type Progress } from './progress.js';
import { canonicalJson } from './config/index.js';
import { TOOL_VERSION } from './version.js';

export interface BuildOptions {
  /** Folder the build is published at; replaced only when the new build has fully succeeded. */
  outDir: string;
  progress?: Progress;
  /** Pair-table slots before spilling; derived from memoryMiB unless set (tests force spilling with it). */
  pairTableCapacity?: number;
}

function stageKey(...parts: unknown[]): string {
  return sha256Text(canonicalJson(parts)).slice(0, 32);
}

async function fingerprintInputs(files: string[]): Promise<InputFingerprint[]> {
  const out: InputFingerprint[] = [];
  for (const file of files) {
    const st = statSync(file);
    out.push({ path: file, bytes: st.size, modified: st.mtime.toISOString(), sha256: await sha256File(file) });
  }
  return out;
}

async function listFiles(root: string, dir = root): Promise<string[]> {
  const out: string[] = [];
  for (const e of await fsp.readdir(dir, { withFileTypes: true })) {
    const p = path.join(dir, e.name);
    if (e.isDirectory()) out.push(...(await listFiles(root, p)));
    else out.push(path.relative(root, p).split(path.sep).join('/'));
  }
  return out.sort();
}

/**
 * Builds the whole matrix: vocabulary, co-occurrence counts, weighted rows, manifest. Everything is written
 * into a temporary sibling folder and published at opts.outDir only when complete.
 */
export async function runBuild(loaded: LoadedConfig, opts: BuildOptions): Promise<Manifest> {
  const cfg = loaded.config;
  const progress = opts.progress ?? silentProgress;
  const outDir = path.resolve(opts.outDir);
  await fsp.mkdir(path.dirname(outDir), { recursive: true }).catch((e: NodeJS.ErrnoException) => {
    throw new KindredError(`cannot create the output folder ${path.dirname(outDir)}: ${e.code ?? e.message}`);
  });
  const files = await resolveInputs(cfg.input.paths, loaded.baseDir);
  const tokenizer = await createTokenizer(cfg.tokenize, loaded.baseDir);
  const workDir = temporarySibling(outDir, 'build');
  const stages: StageRecord[] = [];
  const timed = async <T>(name: string, key: string, run: () => Promise<T>, counts: (r: T) => Record<string, number>): Promise<T> => {
    const t0 = performance.now();
    const r = await run();
    stages.push({ name, key, seconds: Number(((performance.now() - t0) / 1000).toFixed(3)), counts: counts(r) });
    return r;
  };
  try {
    await fsp.mkdir(path.join(workDir, 'counts'), { recursive: true });
    await fsp.mkdir(path.join(workDir, 'weighted'), { recursive: true });

    const inputs = await timed('fingerprint', stageKey(files), () => fingerprintInputs(files), (r) => ({ files: r.length, bytes: r.reduce((s, f) => s + f.bytes, 0) }));
    const totalBytes = inputs.reduce((s, f) => s + f.bytes, 0);
    const inputKey = stageKey(inputs.map((f) => f.sha256));
    const vocabKey = stageKey(inputKey, cfg.input, cfg.tokenize, cfg.vocabulary);
    const countKey = stageKey(vocabKey, cfg.contexts, cfg.output.parts);
    const weightKey = stageKey(countKey, cfg.weighting, cfg.normalize, cfg.output.valueType);

    const stats = emptyIngestStats();
    const { vocab, counter } = await timed('vocabulary', vocabKey, () => countTerms(files, cfg, tokenizer, stats, progress, totalBytes),
      (r) => ({ documents: stats.documents, tokens: r.counter.tokens, distinctTerms: r.counter.size, vocabulary: r.vocab.terms.length }));
    if (counter.tokens === 0) {
      throw new KindredError(`the corpus is empty: ${files.length} input file(s) gave ${stats.documents} document(s) and no token (check input.format and input.textField)`);
    }
    if (vocab.terms.length === 0) {
      throw new KindredError(`the vocabulary is empty: no term reaches vocabulary.minCount=${cfg.vocabulary.minCount} and vocabulary.minDocFreq=${cfg.vocabulary.minDocFreq}; lower them`);
    }
    await writeVocabulary(path.join(workDir, 'vocab.arrow'), vocab);

    const nCols = cfg.contexts.type === 'document' ? stats.documents : vocab.terms.length;
    const ranges = partitionRows(vocab, cfg.contexts, nCols, cfg.output.parts);
    const counted = await timed('count', countKey,
      () => countPairs(files, cfg, tokenizer, vocab, nCols, ranges, workDir, opts.pairTableCapacity ?? pairTableCapacity(cfg.memoryMiB), progress, totalBytes),
      (r) => ({ pairEvents: r.pairs, entries: r.entries.reduce((a, b) => a + b, 0), spilledRuns: r.spilledRuns }));
    await fsp.rm(path.join(workDir, 'spill'), { recursive: true, force: true });

    const weightedEntries = await timed('weight', weightKey, () => weightShards(cfg, ranges, counted.marginals, workDir, progress),
      (r) => ({ entries: r.reduce((a, b) => a + b, 0) }));

    const parts: PartRecord[] = ranges.map((r, i) => ({
      index: i, firstRow: r.firstRow, endRow: r.endRow,
      countsFile: `counts/${partFileName(i)}`, countsEntries: counted.entries[i],
      weightedFile: `weighted/${partFileName(i)}`, weightedEntries: weightedEntries[i],
    }));
    const fileRecords: FileRecord[] = [];
    for (const rel of await listFiles(workDir)) {
      const p = path.join(workDir, rel);
      fileRecords.push({ path: rel, bytes: statSync(p).size, sha256: await sha256File(p) });
    }
    const manifest: Manifest = {
      format: 'kindred-build',
      formatVersion: FORMAT_VERSION,
      toolVersion: TOOL_VERSION,
      createdAt: new Date().toISOString(),
      configFile: loaded.file,
      configHash: loaded.hash,
      config: cfg,
      inputs,
      ingest: stats,
      matrix: {
        rows: vocab.terms.length,
        cols: nCols,
        columns: cfg.contexts.type === 'document' ? 'documents' : 'terms',
        countsEntries: counted.entries.reduce((a, b) => a + b, 0),
        weightedEntries: weightedEntries.reduce((a, b) => a + b, 0),
        total: counted.marginals.total,
      },
      stages,
      parts,
      files: fileRecords,
    };
    await writeFileAtomic(path.join(workDir, MANIFEST_FILE), JSON.stringify(manifest, null, 2) + '\n');
    await publishDirectory(workDir, outDir);
    return manifest;
  } finally {
    await fsp.rm(workDir, { recursive: true, force: true });
  }
}
