/**
 * Runs python3 (numpy/scipy) as an outside reference for tests.
 * Outside CI a missing python3/numpy/scipy skips the reference checks; with CI=true it is a failure.
 */
import { spawnSync } from 'node:child_process';
import { fileURLToPath } from 'node:url';
import path from 'node:path';

export const repoRoot = path.resolve(path.dirname(fileURLToPath(import.meta.url)), '..', '..');

let cached: boolean | undefined;

/** True when python3 with numpy and scipy can be run. Throws in CI when they cannot. */
export function pythonAvailable(): boolean {
  if (cached !== undefined) return cached;
  const r = spawnSync('python3', ['-c', 'import numpy, scipy, scipy.sparse, scipy.spatial'], { encoding: 'utf8' });
  cached = r.status === 0;
  if (!cached && process.env.CI === 'true') {
    throw new Error(`reference tool missing in CI: python3 with numpy and scipy is required (${r.stderr || r.error})`);
  }
  return cached;
}

/** Runs a python script (file path relative to the repo, or inline code with `-c`), passing JSON on stdin, returning parsed JSON from stdout. */
export function runPythonJson<T>(args: string[], input: unknown): T {
  const r = spawnSync('python3', args, {
    input: JSON.stringify(input),
    encoding: 'utf8',
    cwd: repoRoot,
    maxBuffer: 1 << 30,
  });
  if (r.status !== 0) throw new Error(`python3 ${args.join(' ')} failed: ${r.stderr}`);
  return JSON.parse(r.stdout) as T;
}

/** Runs python3 with arguments, returning stdout; throws with stderr on failure. */
export function runPython(args: string[], opts: { input?: string | Buffer } = {}): string {
  const r = spawnSync('python3', args, { input: opts.input, encoding: 'utf8', cwd: repoRoot, maxBuffer: 1 << 30 });
  if (r.status !== 0) throw new Error(`python3 ${args.join(' ')} failed: ${r.stderr}`);
  return r.stdout;
}
