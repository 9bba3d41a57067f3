/**
 * The work area of an output path and the publication of builds.
 *
 *   <out>                      symbolic link -> <out>.kindred/builds/<id>  (switched atomically)
 *   <out>.kindred/lock         held while a build runs (lock.ts)
 *   <out>.kindred/stages/<stage>-<key>/   finished stage outputs, each with stage.json
 *   <out>.kindred/builds/<id>/            published builds: hard links to stage files + manifest.json
 *   <out>.kindred/tmp/                    stage outputs and builds being written; cleared by every build
 *
 * A stage output is written under tmp/ and renamed into stages/ only when complete, so stages/ never holds
 * a partial one. A build is assembled under tmp/, renamed into builds/, and published by renaming a new
 * symbolic link over <out>: a reader sees the old build or the new one, never a mix.
 */
import { promises as fsp } from 'node:fs';
import path from 'node:path';
import { randomBytes } from 'node:crypto';
import { KindredError } from '../errors.js';
import { sha256File } from './checksum.js';
import type { FileChecksum } from './arrow-sink.js';
import { syncDirectory, syncFile, wrapWriteError, writeFileAtomic } from './atomic.js';
import { MANIFEST_FILE, type FileRecord } from './manifest.js';

export const WORK_AREA_SUFFIX = '.kindred';
export const STAGE_FILE = 'stage.json';
const LINK_TAG = 'link';

/** The folder holding `outDir`'s stages, builds and lock. */
export function workAreaOf(outDir: string): string {
  return `${outDir}${WORK_AREA_SUFFIX}`;
}

/** What stage.json records about a finished stage. */
export interface StageFileRecord<S> {
  format: 'kindred-stage';
  name: string;
  key: string;
  finishedAt: string;
  seconds: number;
  /** The stage's own summary, given back when the stage is reused. */
  summary: S;
  /** Files that go into the published build, paths relative to the stage folder. */
  published: FileRecord[];
  /** Files kept for later stages only (e.g. marginals). */
  internal: FileRecord[];
}

/** A finished stage, fresh or reused. */
export interface StageOutput<S> {
  name: string;
  key: string;
  dir: string;
  summary: S;
  published: FileRecord[];
  reused: boolean;
}

function isCode(e: unknown, code: string): boolean {
  return (e as NodeJS.ErrnoException | null)?.code === code;
}

/** Every file under root, as sorted '/'-separated paths relative to it. */
export async function listFiles(root: string, dir = root): Promise<string[]> {
  const out: string[] = [];
  for (const e of await fsp.readdir(dir, { withFileTypes: true })) {
    const p = path.join(dir, e.name);
    if (e.isDirectory()) out.push(...(await listFiles(root, p)));
    else out.push(path.relative(root, p).split(path.sep).join('/'));
  }
  return out.sort();
}

/**
 * Checksums of files a stage wrote, by absolute path, taken from the bytes as they were written (so they need
 * not be read back); a file whose size differs from its entry is checksummed from the disk.
 */
export type KnownChecksums = Map<string, FileChecksum>;

async function describeFiles(dir: string, rels: string[], known: KnownChecksums): Promise<FileRecord[]> {
  const out: FileRecord[] = [];
  for (const rel of rels) {
    const p = path.join(dir, rel);
    await syncFile(p); // whichever writer made it, it reaches the disk before the stage is sealed
    const st = await fsp.stat(p);
    const k = known.get(p);
    out.push({ path: rel, bytes: st.size, sha256: k !== undefined && k.bytes === st.size ? k.sha256 : await sha256File(p) });
  }
  return out;
}

/** How `<out>` looks before publication. */
export type OutputState =
  | { kind: 'absent' }
  | { kind: 'published'; buildId: string }
  | { kind: 'legacy' };

function buildStamp(): string {
  return new Date().toISOString().replace(/[-:]/g, '').replace(/\.\d+Z$/, 'Z');
}

export class WorkArea {
  readonly root: string;
  readonly stagesDir: string;
  readonly buildsDir: string;
  readonly tmpDir: string;
  readonly lockFile: string;
  private readonly parent: string;
  private readonly base: string;

  constructor(readonly outDir: string) {
    this.root = workAreaOf(outDir);
    this.stagesDir = path.join(this.root, 'stages');
    this.buildsDir = path.join(this.root, 'builds');
    this.tmpDir = path.join(this.root, 'tmp');
    this.lockFile = path.join(this.root, 'lock');
    this.parent = path.dirname(outDir);
    this.base = path.basename(outDir);
    if (this.base === '' || this.base === '.' || this.base === '..') {
      throw new KindredError(`--out ${outDir}: name a folder to publish the build at, e.g. out/build`);
    }
  }

  /** The symbolic link target for a build id, relative to the folder of `<out>`. */
  private linkTarget(buildId: string): string {
    return path.join(`${this.base}${WORK_AREA_SUFFIX}`, 'builds', buildId);
  }

  /**
   * What is at `<out>` now: nothing, a build published by kindred (a link into builds/), or a build folder
   * written by an older kindred. Anything else is refused: kindred never replaces what it did not make.
   */
  async outputState(): Promise<OutputState> {
    let st;
    try {
      st = await fsp.lstat(this.outDir);
    } catch (e) {
      if (isCode(e, 'ENOENT')) return { kind: 'absent' };
      throw new KindredError(`cannot inspect --out ${this.outDir}: ${(e as NodeJS.ErrnoException).code ?? String(e)}`);
    }
    if (st.isSymbolicLink()) {
      const target = await fsp.readlink(this.outDir);
      const abs = path.resolve(this.parent, target);
      if (path.dirname(abs) === this.buildsDir) return { kind: 'published', buildId: path.basename(abs) };
      throw new KindredError(`--out ${this.outDir} is a symbolic link to ${target}, which kindred did not make; remove it or choose another --out`);
    }
    if (st.isDirectory()) {
      const entries = await fsp.readdir(this.outDir);
      if (entries.includes(MANIFEST_FILE)) return { kind: 'legacy' };
      if (entries.length === 0) return { kind: 'absent' };
      throw new KindredError(`--out ${this.outDir} is a folder that holds no kindred build; choose another --out or empty it`);
    }
    throw new KindredError(`--out ${this.outDir} is a file, not a build folder; choose another --out`);
  }

  /** Makes the folders of the work area (again: a build that failed first may have removed them). */
  async create(): Promise<void> {
    for (const dir of [this.root, this.stagesDir, this.buildsDir, this.tmpDir]) {
      await fsp.mkdir(dir, { recursive: true }).catch((e: unknown) => {
        throw wrapWriteError(e, dir);
      });
    }
  }

  /** Removes everything temporary: tmp/ and half-made links next to `<out>`. Call only while holding the lock. */
  async clearTemporary(): Promise<void> {
    await fsp.rm(this.tmpDir, { recursive: true, force: true });
    // a lock's temporary sibling left by a build killed while taking the lock (lock.ts createLock)
    for (const name of await fsp.readdir(this.root).catch(() => [] as string[])) {
      if (name.startsWith('.kindred-lock-')) await fsp.rm(path.join(this.root, name), { force: true });
    }
    const prefix = `.kindred-${LINK_TAG}-${this.base}-`;
    for (const name of await fsp.readdir(this.parent).catch(() => [] as string[])) {
      if (name.startsWith(prefix)) await fsp.rm(path.join(this.parent, name), { force: true });
    }
  }

  /** Removes the work area's empty folders, and the work area itself when nothing is left in it. */
  async removeIfEmpty(): Promise<void> {
    for (const dir of [this.tmpDir, this.stagesDir, this.buildsDir, this.root]) {
      await fsp.rmdir(dir).catch(() => undefined);
    }
  }

  /** A fresh, empty temporary folder under tmp/. */
  async temporaryFolder(tag: string): Promise<string> {
    await fsp.mkdir(this.tmpDir, { recursive: true });
    const dir = path.join(this.tmpDir, `${tag}-${process.pid}-${randomBytes(4).toString('hex')}`);
    await fsp.mkdir(dir).catch((e: unknown) => {
      throw wrapWriteError(e, dir);
    });
    return dir;
  }

  stageDir(name: string, key: string): string {
    return path.join(this.stagesDir, `${name}-${key}`);
  }

  /** True when a folder for stage name/key exists (finished, or damaged). */
  async hasStage(name: string, key: string): Promise<boolean> {
    return (await fsp.stat(this.stageDir(name, key)).catch(() => null)) !== null;
  }

  /**
   * The finished output of stage name/key, with every file checked against its recorded size and SHA-256;
   * null when there is none; `{ damaged }` when it exists but does not check out.
   */
  async findStage<S>(name: string, key: string, onBytes?: (n: number) => void): Promise<StageOutput<S> | null | { damaged: string }> {
    const dir = this.stageDir(name, key);
    let record: StageFileRecord<S>;
    try {
      record = JSON.parse(await fsp.readFile(path.join(dir, STAGE_FILE), 'utf8')) as StageFileRecord<S>;
    } catch (e) {
      if (isCode(e, 'ENOENT')) {
        return (await fsp.stat(dir).catch(() => null)) === null ? null : { damaged: `${STAGE_FILE} is missing` };
      }
      return { damaged: `${STAGE_FILE} is unreadable (${(e as Error).message})` };
    }
    if (record.format !== 'kindred-stage' || record.name !== name || record.key !== key) {
      return { damaged: `${STAGE_FILE} describes another stage` };
    }
    for (const f of [...record.published, ...record.internal]) {
      const p = path.join(dir, f.path);
      const st = await fsp.stat(p).catch(() => null);
      if (st === null) return { damaged: `${f.path} is missing` };
      if (st.size !== f.bytes) return { damaged: `${f.path} has ${st.size} bytes, ${STAGE_FILE} says ${f.bytes}` };
      if ((await sha256File(p, onBytes)) !== f.sha256) return { damaged: `${f.path} does not match its SHA-256` };
    }
    return { name, key, dir, summary: record.summary, published: record.published, reused: true };
  }

  /** Moves a damaged stage output out of the way (into tmp/, which is cleared). */
  async discardStage(name: string, key: string): Promise<void> {
    const dir = this.stageDir(name, key);
    const aside = path.join(this.tmpDir, `discarded-${name}-${key}-${randomBytes(4).toString('hex')}`);
    await fsp.rename(dir, aside).catch(() => fsp.rm(dir, { recursive: true, force: true }));
    await fsp.rm(aside, { recursive: true, force: true });
  }

  /**
   * Seals a stage output written into `tmp`: records its files (those under `publish` go into builds, the
   * rest stay internal) with sizes and SHA-256 in stage.json, then renames the folder into stages/.
   */
  async commitStage<S>(
    name: string, key: string, tmp: string, publish: string[], summary: S, seconds: number, known: KnownChecksums = new Map(),
  ): Promise<StageOutput<S>> {
    const all = await listFiles(tmp);
    const isPublished = (rel: string): boolean => publish.some((p) => rel === p || rel.startsWith(`${p}/`));
    const published = await describeFiles(tmp, all.filter(isPublished), known);
    const internal = await describeFiles(tmp, all.filter((f) => !isPublished(f)), known);
    for (const p of publish) {
      if (!all.some((rel) => rel === p || rel.startsWith(`${p}/`))) {
        throw new Error(`stage ${name} declared "${p}" as published output but wrote no such file`);
      }
    }
    const record: StageFileRecord<S> = {
      format: 'kindred-stage',
      name,
      key,
      finishedAt: new Date().toISOString(),
      seconds,
      summary,
      published,
      internal,
    };
    await writeFileAtomic(path.join(tmp, STAGE_FILE), JSON.stringify(record, null, 2) + '\n');
    await syncTree(tmp);
    const dir = this.stageDir(name, key);
    await fsp.rm(dir, { recursive: true, force: true });
    try {
      await fsp.rename(tmp, dir);
    } catch (e) {
      throw wrapWriteError(e, dir);
    }
    await syncDirectory(this.stagesDir);
    return { name, key, dir, summary, published, reused: false };
  }

  /**
   * Assembles a build from stage outputs (hard links, or copies where the file system has none) plus its
   * manifest, and publishes it at `<out>` by renaming a new symbolic link over it. Returns the new build id
   * and the one it replaced (kept until the next publication, for readers that opened it).
   */
  async publish(stages: StageOutput<unknown>[], manifestText: string): Promise<{ buildId: string; previous: string | null }> {
    const state = await this.outputState();
    const buildId = `${buildStamp()}-${randomBytes(4).toString('hex')}`;
    const assembly = await this.temporaryFolder(`build-${buildId}`);
    for (const stage of stages) {
      for (const f of stage.published) {
        const to = path.join(assembly, f.path);
        await fsp.mkdir(path.dirname(to), { recursive: true }).catch((e: unknown) => {
          throw wrapWriteError(e, path.dirname(to));
        });
        await linkOrCopy(path.join(stage.dir, f.path), to);
      }
    }
    await writeFileAtomic(path.join(assembly, MANIFEST_FILE), manifestText);
    await syncTree(assembly);
    const buildDir = path.join(this.buildsDir, buildId);
    try {
      await fsp.rename(assembly, buildDir);
    } catch (e) {
      throw wrapWriteError(e, buildDir);
    }
    await syncDirectory(this.buildsDir);

    let previous: string | null = state.kind === 'published' ? state.buildId : null;
    if (state.kind === 'legacy') {
      // a build folder from an older kindred: move it into builds/ (the only moment <out> is missing)
      previous = `legacy-${buildStamp()}-${randomBytes(2).toString('hex')}`;
      try {
        await fsp.rename(this.outDir, path.join(this.buildsDir, previous));
      } catch (e) {
        throw wrapWriteError(e, this.outDir);
      }
    }
    await this.switchLink(buildId, state.kind === 'legacy' ? previous : null);
    return { buildId, previous };
  }

  /** Renames a new link over `<out>`; on failure a legacy build moved aside (`legacy`) is put back. */
  private async switchLink(buildId: string, legacy: string | null): Promise<void> {
    const link = path.join(this.parent, `.kindred-${LINK_TAG}-${this.base}-${process.pid}-${randomBytes(4).toString('hex')}`);
    try {
      await fsp.symlink(this.linkTarget(buildId), link);
      await fsp.rename(link, this.outDir);
    } catch (e) {
      await fsp.rm(link, { force: true }).catch(() => undefined);
      if (legacy !== null) await fsp.rename(path.join(this.buildsDir, legacy), this.outDir).catch(() => undefined);
      throw wrapWriteError(e, this.outDir);
    }
    await syncDirectory(this.parent);
  }

  /**
   * Removes builds other than `keepBuilds` and stage outputs not named in `keepStages` ("<name>-<key>").
   * Each is first renamed into tmp/, so a build killed halfway through leaves nothing half-deleted in place.
   */
  async collectGarbage(keepBuilds: string[], keepStages: Set<string>): Promise<void> {
    const doomed: string[] = [];
    for (const id of await fsp.readdir(this.buildsDir).catch(() => [] as string[])) {
      if (!keepBuilds.includes(id)) doomed.push(path.join(this.buildsDir, id));
    }
    for (const name of await fsp.readdir(this.stagesDir).catch(() => [] as string[])) {
      if (!keepStages.has(name)) doomed.push(path.join(this.stagesDir, name));
    }
    for (const dir of doomed) {
      const aside = path.join(this.tmpDir, `gc-${path.basename(dir)}-${randomBytes(4).toString('hex')}`);
      try {
        await fsp.rename(dir, aside);
      } catch {
        continue;
      }
      await fsp.rm(aside, { recursive: true, force: true });
    }
  }
}

/** A hard link (no copy, no extra space); a copy on file systems without hard links. */
async function linkOrCopy(from: string, to: string): Promise<void> {
  try {
    await fsp.link(from, to);
    return;
  } catch (e) {
    const code = (e as NodeJS.ErrnoException).code;
    if (code !== 'EXDEV' && code !== 'EPERM' && code !== 'ENOTSUP' && code !== 'EOPNOTSUPP' && code !== 'EMLINK') throw wrapWriteError(e, to);
  }
  try {
    await fsp.copyFile(from, to);
    await syncFile(to);
  } catch (e) {
    throw wrapWriteError(e, to);
  }
}

/** Flushes every folder of a tree (files are flushed by their writers). */
async function syncTree(dir: string): Promise<void> {
  for (const e of await fsp.readdir(dir, { withFileTypes: true })) {
    if (e.isDirectory()) await syncTree(path.join(dir, e.name));
  }
  await syncDirectory(dir);
}
