/**
 * `kindred verify`: checks a published build against its manifest and against the format rules of
 * docs/formats.md, and reports every problem found, one line each. Nothing is written.
 */
import { existsSync, statSync } from 'node:fs';
import path from 'node:path';
import type { Table } from 'apache-arrow';
import { configHash } from '../config/canonical.js';
import { KindredError } from '../errors.js';
import { sha256File } from './checksum.js';
import { MANIFEST_FILE, readManifest, resolveBuildDir, type Manifest, type PartRecord } from './manifest.js';
import { readArrowTable } from './shards.js';
import { listFiles } from './work-area.js';

export interface VerifyProblem {
  /** The file the problem is in, relative to the build folder ("manifest.json" for the manifest itself). */
  file: string;
  message: string;
}

export interface VerifySummary {
  files: number;
  bytes: number;
  parts: number;
  rows: number;
  countsEntries: number;
  weightedEntries: number;
}

export interface VerifyReport {
  /** The path as given. */
  dir: string;
  /** The folder actually checked (the build a published symbolic link points to). */
  root: string;
  ok: boolean;
  problems: VerifyProblem[];
  checked: VerifySummary;
}

/** At most this many problems of one kind are listed per file; the rest are counted on the last line. */
const MAX_PER_KIND = 3;

class Problems {
  readonly list: VerifyProblem[] = [];
  private readonly kinds = new Map<string, number>();

  add(file: string, message: string, kind = message): void {
    const k = `${file}\u0000${kind}`;
    const n = (this.kinds.get(k) ?? 0) + 1;
    this.kinds.set(k, n);
    if (n <= MAX_PER_KIND) this.list.push({ file, message });
  }

  /** Appends "(and N more like it)" lines for kinds that went over the limit. */
  finish(): VerifyProblem[] {
    for (const [k, n] of this.kinds) {
      if (n > MAX_PER_KIND) {
        const [file, kind] = k.split('\u0000');
        this.list.push({ file, message: `${n - MAX_PER_KIND} more problem(s) like "${kind}"` });
      }
    }
    return this.list;
  }
}

/** Code point order of two strings (the tie-break of vocabulary ids). */
function compareCodePoints(a: string, b: string): number {
  const n = Math.min(a.length, b.length);
  for (let i = 0; i < n; ) {
    const x = a.codePointAt(i)!;
    const y = b.codePointAt(i)!;
    if (x !== y) return x - y;
    i += x > 0xffff ? 2 : 1;
  }
  return a.length - b.length;
}

type Expected = Record<string, string[]>;

/** Checks the column names and types of a table; true when they are as expected. */
function checkSchema(problems: Problems, file: string, table: Table, expected: Expected): boolean {
  const got = table.schema.fields.map((f) => f.name);
  const want = Object.keys(expected);
  if (got.join(',') !== want.join(',')) {
    problems.add(file, `columns are (${got.join(', ')}), expected (${want.join(', ')})`);
    return false;
  }
  let ok = true;
  for (const f of table.schema.fields) {
    const type = String(f.type);
    if (!expected[f.name].includes(type)) {
      problems.add(file, `column ${f.name} has type ${type}, expected ${expected[f.name].join(' or ')}`);
      ok = false;
    }
    const column = table.getChild(f.name);
    if (column && column.nullCount > 0) {
      problems.add(file, `column ${f.name} holds ${column.nullCount} null(s); kindred writes none`);
      ok = false;
    }
  }
  return ok;
}

function readTable(problems: Problems, root: string, file: string): Table | null {
  try {
    return readArrowTable(path.join(root, file));
  } catch (e) {
    const why = e instanceof KindredError ? e.message.replace(`${path.join(root, file)}: `, '') : (e as Error).message;
    problems.add(file, why.startsWith('not a readable') ? why : `not a readable Arrow IPC file (${why})`);
    return null;
  }
}

function checkManifestShape(problems: Problems, m: Manifest): void {
  const M = MANIFEST_FILE;
  if (configHash(m.config) !== m.configHash) problems.add(M, 'configHash does not match the config recorded beside it (was the manifest edited?)');
  const { rows, cols } = m.matrix;
  if (!Number.isInteger(rows) || rows < 0 || !Number.isInteger(cols) || cols < 0) problems.add(M, `matrix.rows ${rows} / matrix.cols ${cols} are not whole numbers`);
  let expectFirst = 0;
  m.parts.forEach((p, i) => {
    if (p.index !== i) problems.add(M, `parts[${i}] has index ${p.index}, expected ${i}`);
    if (p.firstRow !== expectFirst) problems.add(M, `parts[${i}] starts at row ${p.firstRow}, expected ${expectFirst}: the parts must cover rows 0..${rows} without gap or overlap`);
    if (p.endRow < p.firstRow) problems.add(M, `parts[${i}] ends (row ${p.endRow}) before it starts (row ${p.firstRow})`);
    expectFirst = p.endRow;
  });
  if (m.parts.length > 0 && expectFirst !== rows) problems.add(M, `the last part ends at row ${expectFirst}, but matrix.rows is ${rows}`);
  const sumOf = (f: (p: PartRecord) => number): number => m.parts.reduce((s, p) => s + f(p), 0);
  if (sumOf((p) => p.countsEntries) !== m.matrix.countsEntries) {
    problems.add(M, `matrix.countsEntries is ${m.matrix.countsEntries}, but the parts hold ${sumOf((p) => p.countsEntries)}`);
  }
  if (sumOf((p) => p.weightedEntries) !== m.matrix.weightedEntries) {
    problems.add(M, `matrix.weightedEntries is ${m.matrix.weightedEntries}, but the parts hold ${sumOf((p) => p.weightedEntries)}`);
  }
  const listed = new Set<string>();
  for (const f of m.files) {
    if (listed.has(f.path)) problems.add(M, `files[] lists ${f.path} twice`);
    listed.add(f.path);
  }
  for (const p of m.parts) {
    for (const f of [p.countsFile, p.weightedFile]) if (!listed.has(f)) problems.add(M, `parts[${p.index}] names ${f}, which files[] does not list`);
  }
  if (!listed.has('vocab.arrow')) problems.add(M, 'files[] does not list vocab.arrow');
}

async function checkChecksums(problems: Problems, root: string, m: Manifest, summary: VerifySummary): Promise<Set<string>> {
  const intact = new Set<string>();
  const onDisk = new Set((await listFiles(root)).filter((f) => f !== MANIFEST_FILE));
  for (const f of m.files) {
    const p = path.join(root, f.path);
    if (!onDisk.has(f.path)) {
      problems.add(f.path, 'missing (the manifest lists it)');
      continue;
    }
    onDisk.delete(f.path);
    const size = statSync(p).size;
    summary.files++;
    summary.bytes += size;
    if (size !== f.bytes) problems.add(f.path, `has ${size} bytes, the manifest says ${f.bytes} (truncated or replaced?)`);
    const sha = await sha256File(p);
    if (sha !== f.sha256) problems.add(f.path, `SHA-256 ${sha.slice(0, 12)}… differs from the manifest's ${f.sha256.slice(0, 12)}… (corrupted or replaced)`);
    else if (size === f.bytes) intact.add(f.path);
  }
  for (const extra of onDisk) problems.add(extra, 'not listed in the manifest');
  return intact;
}

function checkVocabulary(problems: Problems, root: string, m: Manifest): void {
  const file = 'vocab.arrow';
  if (!existsSync(path.join(root, file))) return;
  const table = readTable(problems, root, file);
  if (!table || !checkSchema(problems, file, table, { id: ['Uint32'], term: ['Utf8'], count: ['Uint64'], doc_freq: ['Uint32'] })) return;
  const n = table.numRows;
  if (n !== m.matrix.rows) problems.add(file, `${n} terms, but matrix.rows in the manifest is ${m.matrix.rows}`);
  const ids = table.getChild('id')!.toArray() as Uint32Array;
  const terms = table.getChild('term')!.toArray() as string[];
  const counts = table.getChild('count')!.toArray() as BigUint64Array;
  const docFreqs = table.getChild('doc_freq')!.toArray() as Uint32Array;
  const seen = new Map<string, number>();
  for (let i = 0; i < n; i++) {
    if (ids[i] !== i) problems.add(file, `row ${i} has id ${ids[i]}; ids must be 0, 1, 2 … in order`, 'id out of order');
    const t = terms[i];
    if (t.length === 0) problems.add(file, `id ${i} has an empty term`, 'empty term');
    const before = seen.get(t);
    if (before !== undefined) problems.add(file, `term "${t}" appears twice (ids ${before} and ${i})`, 'duplicate term');
    seen.set(t, i);
    const c = counts[i];
    if (docFreqs[i] < 1 || BigInt(docFreqs[i]) > c) problems.add(file, `id ${i}: doc_freq ${docFreqs[i]} is not between 1 and its count ${c}`, 'doc_freq');
    if (i > 0 && (counts[i - 1] < c || (counts[i - 1] === c && compareCodePoints(terms[i - 1], t) >= 0))) {
      problems.add(file, `id ${i} ("${t}") is out of order: ids go by descending count, then term`, 'term order');
    }
  }
}

interface ShardCheck {
  kind: 'counts' | 'weighted';
  valueTypes: string[];
  expectEntries: number;
}

/** Checks one shard; returns its (row, col, value) columns when readable with the right schema. */
function checkShard(problems: Problems, root: string, file: string, part: PartRecord, m: Manifest, spec: ShardCheck): { rows: Uint32Array; cols: Uint32Array; values: Float32Array | Float64Array } | null {
  if (!existsSync(path.join(root, file))) return null;
  const table = readTable(problems, root, file);
  if (!table || !checkSchema(problems, file, table, { row: ['Uint32'], col: ['Uint32'], value: spec.valueTypes })) return null;
  const rows = table.getChild('row')!.toArray() as Uint32Array;
  const cols = table.getChild('col')!.toArray() as Uint32Array;
  const values = table.getChild('value')!.toArray() as Float32Array | Float64Array;
  if (rows.length !== spec.expectEntries) problems.add(file, `${rows.length} entries, the manifest says ${spec.expectEntries}`);
  const nCols = m.matrix.cols;
  for (let i = 0; i < rows.length; i++) {
    const r = rows[i];
    const c = cols[i];
    if (r < part.firstRow || r >= part.endRow) problems.add(file, `row ${r} at entry ${i} lies outside the part's rows [${part.firstRow}, ${part.endRow})`, 'row outside part');
    if (c >= nCols) problems.add(file, `col ${c} at entry ${i} is not below the ${nCols} columns`, 'col outside matrix');
    if (i > 0) {
      const pr = rows[i - 1];
      const pc = cols[i - 1];
      if (pr === r && pc === c) problems.add(file, `duplicate entry (row ${r}, col ${c}) at entry ${i}`, 'duplicate');
      else if (pr > r || (pr === r && pc > c)) problems.add(file, `not sorted by (row, col) at entry ${i}: (${r}, ${c}) follows (${pr}, ${pc})`, 'order');
    }
    const v = values[i];
    if (!Number.isFinite(v)) problems.add(file, `value ${v} at entry ${i} (row ${r}, col ${c}) is not finite`, 'not finite');
    else if (spec.kind === 'counts' ? !(v > 0) : v === 0) {
      problems.add(file, `value ${v} at entry ${i} (row ${r}, col ${c}): ${spec.kind === 'counts' ? 'counts are positive' : 'zero weights are not stored'}`, 'bad value');
    }
  }
  return { rows, cols, values };
}

/** Row norms of a weighted shard match the build's `normalize` setting (common practice, no source: L2/L1 unit rows). */
function checkNorms(problems: Problems, file: string, w: { rows: Uint32Array; values: Float32Array | Float64Array }, normalize: string, float32: boolean): void {
  if (normalize !== 'l2' && normalize !== 'l1') return;
  const tol = float32 ? 1e-4 : 1e-9;
  let i = 0;
  while (i < w.rows.length) {
    const r = w.rows[i];
    let s = 0;
    for (; i < w.rows.length && w.rows[i] === r; i++) s += normalize === 'l2' ? w.values[i] * w.values[i] : Math.abs(w.values[i]);
    const norm = normalize === 'l2' ? Math.sqrt(s) : s;
    if (Math.abs(norm - 1) > tol) problems.add(file, `row ${r} has ${normalize.toUpperCase()} norm ${norm}, expected 1 (normalize "${normalize}")`, 'norm');
  }
}

/** Every weighted entry sits where a count does: weights are computed from observed pairs only. */
function checkWeightsHaveCounts(problems: Problems, file: string, c: { rows: Uint32Array; cols: Uint32Array }, w: { rows: Uint32Array; cols: Uint32Array }): void {
  let j = 0;
  for (let i = 0; i < w.rows.length; i++) {
    const r = w.rows[i];
    const col = w.cols[i];
    while (j < c.rows.length && (c.rows[j] < r || (c.rows[j] === r && c.cols[j] < col))) j++;
    if (j >= c.rows.length || c.rows[j] !== r || c.cols[j] !== col) {
      problems.add(file, `weighted entry (row ${r}, col ${col}) has no count in the matching counts part`, 'weight without count');
    }
  }
}

/**
 * Verifies the build at `dir` (a published link is resolved once): checksums and sizes of every file in the
 * manifest, no unlisted files, Arrow schemas, row order and ranges against the manifest's parts, entry counts,
 * vocabulary ids and order, and that the manifest agrees with itself. Throws only when `dir` is not a build.
 */
export async function verifyBuild(dir: string): Promise<VerifyReport> {
  const root = resolveBuildDir(dir);
  let st;
  try {
    st = statSync(root);
  } catch {
    throw new KindredError(`${dir}: no such build folder; give the --out folder of "kindred build"`);
  }
  if (!st.isDirectory()) throw new KindredError(`${dir}: not a folder; give the --out folder of "kindred build"`);
  if (!existsSync(path.join(root, MANIFEST_FILE))) throw new KindredError(`${dir}: not a kindred build (no ${MANIFEST_FILE})`);
  const problems = new Problems();
  const checked: VerifySummary = { files: 0, bytes: 0, parts: 0, rows: 0, countsEntries: 0, weightedEntries: 0 };
  let m: Manifest;
  try {
    m = readManifest(root);
  } catch (e) {
    problems.add(MANIFEST_FILE, (e as Error).message.replace(`${path.join(root, MANIFEST_FILE)}: `, ''));
    return { dir, root, ok: false, problems: problems.finish(), checked };
  }
  try {
    checkManifestShape(problems, m);
  } catch (e) {
    problems.add(MANIFEST_FILE, `does not have the shape of a build manifest (${(e as Error).message})`);
    return { dir, root, ok: false, problems: problems.finish(), checked };
  }
  await checkChecksums(problems, root, m, checked);
  checkVocabulary(problems, root, m);
  checked.rows = m.matrix.rows;
  let countsTotal = 0;
  for (const part of m.parts) {
    checked.parts++;
    const counts = checkShard(problems, root, part.countsFile, part, m, { kind: 'counts', valueTypes: ['Float64'], expectEntries: part.countsEntries });
    const weighted = checkShard(problems, root, part.weightedFile, part, m, {
      kind: 'weighted',
      valueTypes: [m.config.output.valueType === 'float32' ? 'Float32' : 'Float64'],
      expectEntries: part.weightedEntries,
    });
    if (counts) {
      checked.countsEntries += counts.rows.length;
      for (let i = 0; i < counts.values.length; i++) countsTotal += counts.values[i];
    }
    if (weighted) {
      checked.weightedEntries += weighted.rows.length;
      checkNorms(problems, part.weightedFile, weighted, m.config.normalize, m.config.output.valueType === 'float32');
    }
    if (counts && weighted) checkWeightsHaveCounts(problems, part.weightedFile, counts, weighted);
  }
  // the total is summed in another order when the build computes it: equal up to rounding
  if (checked.countsEntries === m.matrix.countsEntries && Math.abs(countsTotal - m.matrix.total) > 1e-9 * Math.max(1, Math.abs(m.matrix.total))) {
    problems.add(MANIFEST_FILE, `matrix.total is ${m.matrix.total}, but the counts sum to ${countsTotal}`);
  }
  const list = problems.finish();
  return { dir, root, ok: list.length === 0, problems: list, checked };
}
