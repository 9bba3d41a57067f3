import { readFileSync } from 'node:fs';
import path from 'node:path';
import type { KindredConfig } from '../config/types.js';
import type { IngestStats } from '../ingest/types.js';
import { KindredError } from '../errors.js';

export const MANIFEST_FILE = 'manifest.json';
export const FORMAT_VERSION = 1;

export interface InputFingerprint {
  path: string;
  bytes: number;
  modified: string;
  sha256: string;
}

export interface StageRecord {
  name: string;
  /** Hash of the stage's inputs and the settings it depends on. */
  key: string;
  seconds: number;
  /** Stage-specific counts (documents, tokens, rows, entries ...). */
  counts: Record<string, number>;
}

export interface PartRecord {
  index: number;
  firstRow: number;
  endRow: number;
  countsFile: string;
  countsEntries: number;
  weightedFile: string;
  weightedEntries: number;
}

export interface FileRecord {
  path: string;
  bytes: number;
  sha256: string;
}

export interface Manifest {
  format: 'kindred-build';
  formatVersion: number;
  toolVersion: string;
  createdAt: string;
  configFile: string;
  configHash: string;
  config: KindredConfig;
  inputs: InputFingerprint[];
  ingest: IngestStats;
  matrix: {
    rows: number;
    cols: number;
    /** What the columns are: vocabulary terms (window contexts) or documents. */
    columns: 'terms' | 'documents';
    countsEntries: number;
    weightedEntries: number;
    total: number;
  };
  stages: StageRecord[];
  parts: PartRecord[];
  files: FileRecord[];
}

export function readManifest(buildDir: string): Manifest {
  const file = path.join(buildDir, MANIFEST_FILE);
  let text: string;
  try {
    text = readFileSync(file, 'utf8');
  } catch (e) {
    const code = (e as NodeJS.ErrnoException).code;
    if (code === 'ENOENT') throw new KindredError(`${buildDir}: not a kindred build (no ${MANIFEST_FILE}); run "kindred build" first`);
    throw new KindredError(`cannot read ${file}: ${code ?? String(e)}`);
  }
  let m: Manifest;
  try {
    m = JSON.parse(text) as Manifest;
  } catch (e) {
    throw new KindredError(`${file}: not valid JSON (${(e as Error).message})`);
  }
  if (m.format !== 'kindred-build') throw new KindredError(`${file}: not a kindred build manifest`);
  if (m.formatVersion !== FORMAT_VERSION) {
    throw new KindredError(`${file}: format version ${m.formatVersion} is not supported (this kindred reads ${FORMAT_VERSION}); rebuild it`);
  }
  return m;
}
