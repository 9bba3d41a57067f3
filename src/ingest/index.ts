/** Reading corpus files into documents: path resolution and one streaming reader per format. */
import type { InputConfig } from '../config/types.js';
import { formatOf, makeContext, READERS } from './readers.js';
import type { Document, IngestStats } from './types.js';

export type { Document, IngestStats } from './types.js';
export { emptyIngestStats } from './types.js';
export { resolveInputs } from './resolve.js';
export { formatOf } from './readers.js';

/**
 * Streams the documents of `files` in order. Gzip is detected by the file's magic bytes; invalid
 * UTF-8 becomes U+FFFD (counted in stats.invalidUtf8Replaced); unusable JSON records follow
 * input.onBadRecord. `onProgress` receives the cumulative number of bytes read from disk.
 */
export async function* readDocuments(
  files: string[],
  input: InputConfig,
  stats: IngestStats,
  onProgress?: (bytesRead: number) => void,
): AsyncGenerator<Document> {
  let bytesRead = 0;
  const ctx = makeContext(input, stats, (n) => {
    bytesRead += n;
    stats.bytes += n;
    onProgress?.(bytesRead);
  });
  for (const file of files) {
    stats.files++;
    yield* READERS[formatOf(file, input.format)](file, ctx);
  }
}
