import { promises as fsp } from 'node:fs';
import path from 'node:path';
import type { KindredConfig } from '../config/types.js';
import { readDocuments } from '../ingest/index.js';
import { emptyIngestStats, type IngestStats } from '../ingest/types.js';
import type { Tokenizer } from '../tokenize/index.js';
import type { Progress } from '../progress.js';
import type { Marginals } from '../weight/types.js';
import { ShardWriter, partFileName } from '../store/shards.js';
import type { Vocabulary } from '../store/vocab-file.js';
import { TermCounter } from './term-counter.js';
import { CooccurrenceCounter } from './cooccur.js';
import type { RowRange } from './partition.js';

/** Pass 1: term counts and document frequencies over the whole corpus. */
export async function countTerms(
  files: string[], cfg: KindredConfig, tokenizer: Tokenizer, stats: IngestStats, progress: Progress, totalBytes: number,
): Promise<{ vocab: Vocabulary; counter: TermCounter }> {
  const counter = new TermCounter();
  progress.start('vocabulary', totalBytes, 'B');
  let doc = 0;
  for await (const d of readDocuments(files, cfg.input, stats, (b) => progress.update(b))) {
    const docIndex = doc++;
    tokenizer.tokenize(d.text, (t) => counter.add(t, docIndex));
  }
  const vocab = counter.finish(cfg.vocabulary);
  progress.end(`${stats.documents} documents, ${counter.tokens} tokens, ${counter.size} distinct terms, ${vocab.terms.length} kept`);
  return { vocab, counter };
}

/** Pass 2: co-occurrence counts into row-partitioned shards; returns the marginals. */
export async function countPairs(
  files: string[], cfg: KindredConfig, tokenizer: Tokenizer, vocab: Vocabulary, nCols: number, ranges: RowRange[],
  workDir: string, capacity: number, progress: Progress, totalBytes: number,
): Promise<{ marginals: Marginals; entries: number[]; pairs: number; spilledRuns: number }> {
  const ids = new Map<string, number>();
  vocab.terms.forEach((t, i) => ids.set(t, i));
  const spillDir = path.join(workDir, 'spill');
  await fsp.mkdir(spillDir, { recursive: true });
  const counter = new CooccurrenceCounter({
    contexts: cfg.contexts,
    nRows: vocab.terms.length,
    nCols,
    capacity,
    spillDir,
  });
  progress.start('count', totalBytes, 'B');
  let buf = new Int32Array(4096);
  let len = 0;
  const push = (t: string): void => {
    if (len === buf.length) {
      const bigger = new Int32Array(buf.length * 2);
      bigger.set(buf);
      buf = bigger;
    }
    buf[len++] = ids.get(t) ?? -1;
  };
  let doc = 0;
  const passStats = emptyIngestStats();
  for await (const d of readDocuments(files, cfg.input, passStats, (b) => progress.update(b))) {
    len = 0;
    tokenizer.tokenize(d.text, push);
    counter.addDocument(buf, len, doc++);
  }
  const writers = ranges.map((_, i) => new ShardWriter(path.join(workDir, 'counts', partFileName(i)), 'float64'));
  let part = 0;
  const marginals = counter.finish((row, col, count) => {
    while (row >= ranges[part].endRow) part++;
    writers[part].append(row, col, count);
  });
  for (const w of writers) await w.close();
  progress.end(`${counter.pairs} pair events, ${writers.reduce((s, w) => s + w.entries, 0)} nonzero counts, ${counter.spilledRuns} spilled runs`);
  return { marginals, entries: writers.map((w) => w.entries), pairs: counter.pairs, spilledRuns: counter.spilledRuns };
}

