import { readFileSync, realpathSync } from 'node:fs';
import path from 'node:path';
import type { KindredConfig } from '../config/types.js';
import type { IngestStats } from '../ingest/types.js';
import type { VectorsRecord } from '../reduce/stage.js';
import type { NeighborsRecord } from '../query/table-stage.js';
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
  /** Seconds this build spent on the stage (checking its files when reused). */
  seconds: number;
  /** True when the stage's output was found finished in the work area and reused. */
  reused: boolean;
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
  /** Present when the build computed vectors.arrow (vectors.enabled). */
  vectors?: VectorsRecord;
  /** Present when the build computed neighbors.arrow (neighbors.enabled): measure, k, source, … */
  neighbors?: NeighborsRecord;
}

/**
 * The folder a build path stands for now. `kindred build --out DIR` publishes DIR as a symbolic link that a
 * later build switches; a reader that opens several files resolves DIR once, so all of them come from the
 * same build (the previous build is kept until the next one is published).
 */
export function resolveBuildDir(dir: string): string {
  try {
    return realpathSync(dir);
  } catch {
    return dir;
  }
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
