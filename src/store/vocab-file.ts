import { Table, makeVector, RecordBatchFileWriter } from './arrow.js';
import { utf8Data } from './arrow-sink.js';
import { writeFileAtomic } from './atomic.js';
import { readArrowTable } from './shards.js';
import { KindredError } from '../errors.js';

/** The vocabulary: ids 0..size-1 by descending count, ties by term in code point order. */
export interface Vocabulary {
  terms: string[];
  counts: Float64Array;
  docFreqs: Uint32Array;
}

/** Writes `vocab.arrow`: id uint32, term utf8, count uint64, doc_freq uint32, sorted by id. */
export async function writeVocabulary(file: string, vocab: Vocabulary): Promise<void> {
  const n = vocab.terms.length;
  const ids = new Uint32Array(n);
  const counts = new BigUint64Array(n);
  for (let i = 0; i < n; i++) {
    ids[i] = i;
    counts[i] = BigInt(vocab.counts[i]);
  }
  const table = new Table({
    id: makeVector(ids),
    term: makeVector(utf8Data(vocab.terms)),
    count: makeVector(counts),
    doc_freq: makeVector(vocab.docFreqs),
  });
  const bytes = RecordBatchFileWriter.writeAll(table).toUint8Array(true);
  await writeFileAtomic(file, bytes);
}

export function readVocabulary(file: string): Vocabulary {
  const table = readArrowTable(file);
  const term = table.getChild('term');
  const count = table.getChild('count');
  const df = table.getChild('doc_freq');
  if (!term || !count || !df) throw new KindredError(`${file}: missing one of the columns term, count, doc_freq`);
  const terms = term.toArray() as string[];
  const rawCounts = count.toArray() as BigUint64Array;
  return {
    terms: Array.from(terms),
    counts: Float64Array.from(rawCounts, (c) => Number(c)),
    docFreqs: Uint32Array.from(df.toArray() as Uint32Array),
  };
}
