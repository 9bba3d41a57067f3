/** One document read from an input file, before tokenization. */
export interface Document {
  /** Absolute path of the file the document came from. */
  file: string;
  /** 1-based line (record start) in the file; for json-array the element index+1; for text-file 1 */
  line: number;
  /** The record's id (from `input.idField`), or null when there is none. */
  id: string | null;
  text: string;
}

/** Counters filled in while documents are read; the caller owns the object and may share it across calls. */
export interface IngestStats {
  /** Files opened. */
  files: number;
  /** Bytes read from disk (compressed size for gzip files). */
  bytes: number;
  /** Documents yielded. */
  documents: number;
  /** count of U+FFFD replacements made for invalid byte sequences */
  invalidUtf8Replaced: number;
  /** Records skipped under `input.onBadRecord: "skip"` (bad JSON, a NUL byte, a line over the size limit). */
  badRecordsSkipped: number;
  /** Whole files skipped as binary (a NUL byte in their first 8 KiB) under `input.onBadRecord: "skip"`. */
  binaryFilesSkipped: number;
}

/** A fresh set of zeroed counters. */
export function emptyIngestStats(): IngestStats {
  return { files: 0, bytes: 0, documents: 0, invalidUtf8Replaced: 0, badRecordsSkipped: 0, binaryFilesSkipped: 0 };
}

/** Adds every counter of `from` into `into` (for stats gathered per split or per thread). */
export function addIngestStats(into: IngestStats, from: IngestStats): void {
  for (const k of Object.keys(into) as (keyof IngestStats)[]) into[k] += from[k] ?? 0;
}
