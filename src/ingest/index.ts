/** Reading corpus files into documents: path resolution and one streaming reader per format. */
import type { InputConfig } from '../config/types.js';
import { formatOf, makeContext, READERS } from './readers.js';
import { MAX_DOCUMENT_BYTES } from './binary.js';
import type { Document, IngestStats } from './types.js';

export type { Document, IngestStats } from './types.js';
export { emptyIngestStats, addIngestStats } from './types.js';
export { MAX_DOCUMENT_BYTES, BINARY_SNIFF_BYTES } from './binary.js';
export { resolveInputs } from './resolve.js';
export { formatOf } from './readers.js';

/** Limits of one read; tests lower them to reach the error paths with small files. */
export interface ReadLimits {
  /** The longest line (text-lines, jsonl) or file (text-file) read as one document; default MAX_DOCUMENT_BYTES. */
  maxDocumentBytes?: number;
}

/**
 * Streams the documents of `files` in order. Gzip is detected by the file's magic bytes; invalid
 * UTF-8 becomes U+FFFD (counted in stats.invalidUtf8Replaced); binary files, unusable lines and records
 * follow input.onBadRecord (docs/reliability.md). `onProgress` receives the cumulative number of bytes read from disk.
 */
export async function* readDocuments(
  files: string[],
  input: InputConfig,
  stats: IngestStats,
  onProgress?: (bytesRead: number) => void,
  limits: ReadLimits = {},
): AsyncGenerator<Document> {
  let bytesRead = 0;
  const onDiskBytes = (n: number): void => {
    bytesRead += n;
    stats.bytes += n;
    onProgress?.(bytesRead);
  };
  const ctx = makeContext(input, stats, onDiskBytes, limits.maxDocumentBytes ?? MAX_DOCUMENT_BYTES);
  for (const file of files) {
    stats.files++;
    yield* READERS[formatOf(file, input.format)](file, ctx);
  }
}
